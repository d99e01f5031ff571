package series

import "bandfold/cmd/bandfold/internal/jobkit"

// FolderSummary is what the summary of a change or a timeline folder says
// of the run as a whole; the command adds its dates, pairs and model.
type FolderSummary struct {
	// Paths is how the document records paths: relative to the output
	// folder (inputs, a --basis file, outputs; jobkit.DocPaths).
	Paths jobkit.DocPaths `json:"-"`
	// ValidPixels and ChangedPixels are the pixels valid and those
	// mapped as changed (the command says on which pairs); the areas are
	// null without a CRS.
	ValidPixels   int64    `json:"valid_pixels"`
	ChangedPixels int64    `json:"changed_pixels"`
	ChangedAreaM2 *float64 `json:"changed_area_m2"`
	ChangedAreaHa *float64 `json:"changed_area_ha"`
	Components    int      `json:"components"`
	Basis         string   `json:"basis"`
	MinAreaPixels int      `json:"min_area_pixels"`
	Aligned       bool     `json:"aligned"`
	// BandMatch says how the bands were matched when the dates' bands
	// differed ("" when compared as given).
	BandMatch string `json:"band_match,omitempty"`
	Patches   int    `json:"patches"`
	// Scenario is the SCENARIO tag of invented input data.
	Scenario string `json:"scenario,omitempty"`
	// Warnings repeats the warnings printed on stderr about the map.
	Warnings []string `json:"warnings"`
	Outputs  []string `json:"outputs"`
	AreaNote string   `json:"area_note"`
	Caution  string   `json:"caution"`
}

// FolderSummary is the summary's part the engine knows once the model is
// fitted, with areaNote saying what the mapped areas are.
func (r *Run) FolderSummary(areaNote string) FolderSummary {
	paths := jobkit.DocPaths{Dir: r.Dir.Final()}
	return FolderSummary{Paths: paths, Components: r.Proj.Components(), Basis: r.BasisIn(paths), MinAreaPixels: r.MinPixels,
		Aligned: r.Aligned, BandMatch: r.Matched, Scenario: r.Scenes[0].Metadata["SCENARIO"], Warnings: jobkit.Strings(r.Warnings),
		Outputs: []string{}, AreaNote: areaNote, Caution: jobkit.Caution}
}

// SetChangedArea sets the changed area from m2 square metres, when the
// grid has a CRS.
func (s *FolderSummary) SetChangedArea(r *Run, m2 float64) {
	if r.Areas != nil {
		s.ChangedAreaM2, s.ChangedAreaHa = jobkit.Ptr(m2), jobkit.Ptr(m2/1e4)
	}
}
