// Package timeline is the change job over many dates (Timeline): the series
// engine on every consecutive step and the skips that confirm a step's
// flags, the confirmation of lasting change, and the timeline folder's own
// outputs (step maps, first change, patches, report, timeline.json).
package timeline
