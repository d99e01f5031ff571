// Package figures draws the pictures that bandfold writes next to its
// numeric outputs, in pure Go (no GDAL):
//
//   - Scree: a scree plot of the share of variance per principal
//     component, its cumulative curve, the broken-stick reference and
//     a marker at the number of kept components.
//   - Loadings: a band × component heat map of the kept loadings on a
//     diverging colour scale centred on zero, with a colour bar.
//   - Quicklook helpers: percentile stretch (Percentiles, Stretch),
//     RGB composition (RGB), patch outlines (Outline), a legend panel
//     with a scale bar and a line of text (Annotate).
//   - The change figures: the Z diagnostics (Diagnostics), the
//     rate–distortion curve (Rate), the timeline's bars (TimelineBars) and
//     date map (DateMap, DateColours), and the colours the class rasters
//     share with them (MapBackground, LastingColour, FlaggedColour).
//
// Every figure's text goes through a recording canvas: the ...Layout
// functions return a figure with the box of each piece of text (Layout,
// TextBox), so that tests can check that no text overlaps other text or
// leaves the image. Legends sit under the plots, where they hide no data.
//
// The package owns only drawing: it does not read rasters or compute
// principal components. Callers pass plain slices (decimated first for
// quicklooks, so memory stays bounded) and get PNG bytes or images back; writing files is the caller's.
package figures
