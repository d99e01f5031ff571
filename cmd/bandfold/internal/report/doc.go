// Package report lays out bandfold's HTML reports (one self-contained page
// with the caution, facts, tables and PNG figures) and draws the previews the
// jobs write beside their rasters: natural-colour composites, stretch limits
// and the preview grid that gathers a scene's pixels tile by tile.
package report
