package cli

import (
	"fmt"
	"maps"
	"slices"
	"strings"
)

// OutputFile is one file a command writes.
type OutputFile struct {
	// Name is the file's name, or a pattern of it (OUT for the --out
	// value, STEM for OUT without its extension).
	Name string
	// When says when it is written ("" always).
	When string
	// What says what it holds.
	What string
}

// Outputs lists, by command path, every file each command writes: the one
// table that the commands' help, docs/outputs.md and the test comparing it
// with the files real runs write all read.
var Outputs = map[string][]OutputFile{
	"learn": {
		{"OUT", "with --out", "the basis file (JSON, docs/schemas/basis.schema.json): band statistics, covariance, eigenvalues and eigenvectors, the source bands"},
		{"PARTIAL", "with --partial", "the shard's un-decomposed statistics (JSON) for merge"},
	},
	"merge": {{"OUT", "", "the basis file the single run would have written"}},
	"inspect": {
		{"PLOTS/scree.png", "with --plots", "share of variance per component"},
		{"PLOTS/loadings.png", "with --plots", "band x component loadings"},
		{"PLOTS/rate.png", "with --plots", "estimated size ratio against predicted RMSE, one point per k"},
		{"PLOTS/report.html", "with --plots", "the basis report: variance, loadings, rate and distortion"},
	},
	"fold": {
		{"OUT", "", "the component image (GeoTIFF or COG): one band per kept component, described PC1 (62.10% of variance) or MNF1 (SNR 41.2)"},
		{"STEM.item.json", "", "its STAC Item (docs/schemas/stac-item.schema.json)"},
		{"PREVIEW", "with --preview", "a quicklook PNG of the first three components"},
	},
	"unfold": {
		{"OUT", "", "the bands rebuilt from the components"},
		{"STEM.item.json", "", "its STAC Item"},
	},
	"denoise": {
		{"OUT", "", "the denoised bands"},
		{"STEM.item.json", "", "its STAC Item"},
	},
	"change": {
		{"change.tif", "", "the change map: 1 change, 0 no change, 255 nodata (after the minimum mapping unit)"},
		{"change.tif.aux.xml", "", "its class names and colours (a raster attribute table GDAL reads beside the file)"},
		{"magnitude.tif", "", "the change statistic Z of every pixel (chi-square with k degrees of freedom under no change)"},
		{"pvalue.tif", "with --pvalues", "the no-change p-value of Z"},
		{"differences.tif", "with --differences", "per component, the score difference minus the no-change location"},
		{"changes.gpkg", "", "the change patches as polygons, with their area and Z"},
		{"preview.png", "", "the after date with the mapped change outlined"},
		{"diagnostics.png", "", "the distribution of Z against the no-change model, with the threshold"},
		{"report.html", "", "the report: caution, dates and settings, figures, summary, accuracy, estimated area"},
		{"item.json", "", "the folder's STAC Item"},
		{"summary.json", "", "the summary, its paths relative to DIR (docs/schemas/change-summary.schema.json)"},
		{"bandfold-output.json", "", "the folder's manifest"},
	},
	"timeline": {
		{"steps.tif", "", "one band per step: none, flagged (did not last), lasting, nodata"},
		{"steps.tif.aux.xml", "", "its class names and colours (GDAL's sidecar)"},
		{"first-change.tif", "", "the date of the first lasting change (YYYYMMDD)"},
		{"first-change.tif.aux.xml", "", "its dates' names and colours (GDAL's sidecar)"},
		{"last-change.tif", "", "the date of the last lasting change (YYYYMMDD)"},
		{"last-change.tif.aux.xml", "", "its dates' names and colours (GDAL's sidecar)"},
		{"change-count.tif", "", "lasting changes per pixel"},
		{"max-magnitude.tif", "", "the largest Z over the steps and its step"},
		{"changes.gpkg", "", "the lasting patches of every step as polygons"},
		{"timeline.png", "", "mapped change per step"},
		{"first-change.png", "", "the map of the first lasting change"},
		{"report.html", "", "the report"},
		{"item.json", "", "the folder's STAC Item"},
		{"timeline.json", "", "the summary, its paths relative to DIR (docs/schemas/timeline-summary.schema.json)"},
		{"bandfold-output.json", "", "the folder's manifest"},
	},
	"survey draw": {
		{"OUT", "", "the reference sample's points (GeoPackage), with their stratum, weight and an empty reference field"},
		{"STEM.csv", "", "the same points as CSV, for labelling in a spreadsheet"},
	},
	"survey estimate": {
		{"estimate.json", "", "beside the survey: estimated areas with 95% intervals, accuracies, error matrix, its paths relative to its folder (docs/schemas/survey-estimate.schema.json)"},
		{"report.html", "for a change folder", "the change report again, with the estimated area"},
	},
	"demo synth": {{"OUT", "", "an invented cube of correlated bands"}},
}

// OutputsHelp is the "Outputs" section of a command's help: its files, one
// per line ("" for a command that writes none).
func OutputsHelp(command string) string {
	files := Outputs[command]
	if len(files) == 0 {
		return ""
	}
	width := 0
	for _, f := range files {
		width = max(width, len(f.Name))
	}
	var b strings.Builder
	b.WriteString("\n\nOutputs:\n")
	for _, f := range files {
		what := f.What
		if f.When != "" {
			what = "(" + f.When + ") " + what
		}
		fmt.Fprintf(&b, "  %-*s  %s\n", width, f.Name, what)
	}
	return strings.TrimRight(b.String(), "\n")
}

// OutputsMarkdown is docs/outputs.md's table of every command's files.
func OutputsMarkdown() string {
	var b strings.Builder
	for _, cmd := range slices.Sorted(maps.Keys(Outputs)) {
		fmt.Fprintf(&b, "## bandfold %s\n\n| file | when | what it holds |\n| --- | --- | --- |\n", cmd)
		for _, f := range Outputs[cmd] {
			when := f.When
			if when == "" {
				when = "always"
			}
			fmt.Fprintf(&b, "| `%s` | %s | %s |\n", f.Name, when, f.What)
		}
		b.WriteString("\n")
	}
	return b.String()
}
