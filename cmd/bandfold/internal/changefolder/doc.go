// Package changefolder owns the folder a change run writes: its summary
// schema (summary.json, ChangeResult), the summary's text for people and the
// folder's report.html, which a later survey estimate re-renders with its
// own section. Change maps are screening results: every report carries the
// caution.
package changefolder
