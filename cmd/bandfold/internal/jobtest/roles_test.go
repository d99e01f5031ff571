package jobtest

import (
	"encoding/json"
	"os/exec"
	"path/filepath"
	"slices"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"bandfold/raster"
	"bandfold/tiles/testenv"
	"bandfold/transform"
)

// gdalInfo is what GDAL's gdalinfo -json reports of a raster that the
// checks below read: each band's colour interpretation (GDAL's reading of
// a TIFF's PHOTOMETRIC: MINISBLACK gives Gray then Undefined, RGB gives
// Red, Green, Blue, PALETTE gives Palette), description, category names
// and colour table, and the raster attribute table, which gdalinfo
// reports for band 1 only, at the top level.
type gdalInfo struct {
	Bands []struct {
		ColorInterpretation string           `json:"colorInterpretation"`
		Description         string           `json:"description"`
		Categories          []string         `json:"categories"`
		ColorTable          *json.RawMessage `json:"colorTable"`
	} `json:"bands"`
	RAT *struct {
		FieldDefn []struct {
			Usage int `json:"usage"`
		} `json:"fieldDefn"`
		Row []struct {
			F []any `json:"f"`
		} `json:"row"`
	} `json:"rat"`
}

// readGDALInfo runs GDAL's own gdalinfo -json (gdal-bin) on path.
func readGDALInfo(t *testing.T, path string) gdalInfo {
	t.Helper()
	out, err := exec.Command("gdalinfo", "-json", path).Output()
	if err != nil {
		t.Fatalf("gdalinfo -json %s: %v", path, err)
	}
	var info gdalInfo
	if err := json.Unmarshal(out, &info); err != nil {
		t.Fatalf("gdalinfo -json %s: %v", path, err)
	}
	return info
}

// outputRole is what a raster bandfold writes must carry: values (a
// component, a statistic, a restored band), classes (category names and
// a raster attribute table with colours; a colour table too when one Byte
// band) or dates (YYYYMMDD values, named and coloured as a ramp in a raster
// attribute table: a colour table cannot index Int32 values, and GDAL's
// GeoTIFF driver keeps one for Byte and UInt16 bands only). bandfold
// writes no colour quicklook as a raster (fold --preview writes a PNG), so
// no output may read as Red/Green/Blue/Alpha.
type outputRole int

const (
	roleValues outputRole = iota
	roleClasses
	roleDates
)

// roleOf gives each output its role by file name; a raster the test finds
// that is not listed fails it, so that a new output is checked too.
var roleOf = map[string]outputRole{
	"components.tif": roleValues, "budget.tif": roleValues, "restored.tif": roleValues, "denoised.tif": roleValues,
	"change.tif": roleClasses, "magnitude.tif": roleValues, "pvalue.tif": roleValues, "differences.tif": roleValues,
	"steps.tif": roleClasses, "first-change.tif": roleDates, "last-change.tif": roleDates,
	"change-count.tif": roleValues, "max-magnitude.tif": roleValues,
}

// RAT column usages (GDAL's GDALRATFieldUsage): GFU_Name, GFU_Red,
// GFU_Green, GFU_Blue.
const (
	ratName  = 2
	ratRed   = 6
	ratGreen = 7
	ratBlue  = 8
)

// TestBandRolesOfEveryOutput (issue 26): every raster that fold (float
// scores and budgeted integer codes), unfold, denoise, change and timeline
// write is read by GDAL's own gdalinfo -json (gdal-bin, not bandfold's
// reader) and checked against GDAL's report: band 1 reads as Gray (or
// Palette for a one-band class raster with a colour table) and every
// other band as Undefined, so no file is PHOTOMETRIC=RGB and no band
// Red/Green/Blue/Alpha; every band has a description; class rasters carry
// category names and a raster attribute table with names and colours;
// date rasters a raster attribute table naming each date in its own
// colour.
func TestBandRolesOfEveryOutput(t *testing.T) {
	testenv.NeedTool(t, "gdalinfo", "gdal-bin")
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 64, 3)
	basis, mnf := filepath.Join(dir, "b.json"), filepath.Join(dir, "mnf.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Before}, Out: basis, Components: 3})
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{f.Hyper}, Out: mnf, Method: transform.MNF, Components: 4})
	comps := filepath.Join(dir, "components.tif")
	Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{f.Before}, Basis: basis, Out: comps})
	Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{f.Before}, Basis: basis, Out: filepath.Join(dir, "budget.tif"),
		Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 80}}) // 3 Byte bands of codes, which GDAL would tag RGB
	if _, err := fold.Unfold(t.Context(), TestEnv, fold.UnfoldOptions{Components: comps, Basis: basis, Out: filepath.Join(dir, "restored.tif")}); err != nil {
		t.Fatal(err)
	}
	if _, err := fold.Denoise(t.Context(), TestEnv, fold.DenoiseOptions{Image: f.Hyper, Basis: mnf, Out: filepath.Join(dir, "denoised.tif")}); err != nil {
		t.Fatal(err)
	}
	chg, tl := filepath.Join(dir, "change"), filepath.Join(dir, "timeline")
	RunChange(t, TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, PValues: true, Differences: true, SharedOptions:
	// Four dates make steps.tif 3 Byte bands, which GDAL would otherwise
	// tag RGB; the timeline in COG also checks the COG driver's copy.
	series.SharedOptions{Out: chg}})

	third, fourth := thirdDate(t, f.Before, dir), filepath.Join(dir, "vessel-2026-06-21.tif")
	CopyFile(t, third, fourth)
	if _, err := timeline.Timeline(t.Context(), TestEnv, timeline.TimelineOptions{Scenes: []string{f.Before, f.After, third, fourth}, SharedOptions: series.SharedOptions{Out: tl,
		Output: jobkit.OutputFormat{Format: raster.COG}}}); err != nil {
		t.Fatal(err)
	}
	files, _ := filepath.Glob(filepath.Join(dir, "*", "*.tif"))
	for _, name := range []string{"components.tif", "budget.tif", "restored.tif", "denoised.tif"} {
		files = append(files, filepath.Join(dir, name))
	}
	var written []string
	for _, file := range files {
		if filepath.Base(filepath.Dir(file)) == "scenario" {
			continue // the invented inputs
		}
		name := filepath.Base(file)
		written = append(written, name)
		role, ok := roleOf[name]
		if !ok {
			t.Errorf("%s: a raster this test does not know; give it a role", name)
			continue
		}
		checkRoles(t, name, role, readGDALInfo(t, file))
	}
	if len(written) != len(roleOf) {
		t.Errorf("rasters written %v, want the %d of roleOf", written, len(roleOf))
	}
}

// checkRoles checks gdalinfo's report of one raster against its role.
func checkRoles(t *testing.T, name string, role outputRole, info gdalInfo) {
	t.Helper()
	for i, b := range info.Bands {
		want := "Undefined"
		if i == 0 {
			want = "Gray"
			if role == roleClasses && len(info.Bands) == 1 {
				want = "Palette"
			}
		}
		if b.ColorInterpretation != want {
			t.Errorf("%s band %d reads as %s, want %s (GIS software takes Red/Green/Blue/Alpha as a colour image)", name, i+1, b.ColorInterpretation, want)
		}
		if b.Description == "" {
			t.Errorf("%s band %d has no description", name, i+1)
		}
		if role == roleClasses && (len(b.Categories) == 0 || (len(info.Bands) == 1) != (b.ColorTable != nil)) {
			t.Errorf("%s band %d: category names %q, colour table %v", name, i+1, b.Categories, b.ColorTable != nil)
		}
	}
	if role == roleValues {
		return
	}
	rat := info.RAT
	if rat == nil || len(rat.Row) < 2 {
		t.Errorf("%s: no raster attribute table of its classes", name)
		return
	}
	var usages []int
	for _, f := range rat.FieldDefn {
		usages = append(usages, f.Usage)
	}
	cols := []int{slices.Index(usages, ratName), slices.Index(usages, ratRed), slices.Index(usages, ratGreen), slices.Index(usages, ratBlue)}
	if slices.Contains(cols, -1) {
		t.Errorf("%s: raster attribute table usages %v lack a name or colour column", name, usages)
		return
	}
	colours := map[[3]any]bool{}
	for _, r := range rat.Row {
		if s, _ := r.F[cols[0]].(string); s == "" {
			t.Errorf("%s: a class without a name: %v", name, r.F)
		}
		colours[[3]any{r.F[cols[1]], r.F[cols[2]], r.F[cols[3]]}] = true
	}
	if role == roleDates && len(colours) != len(rat.Row) {
		t.Errorf("%s: %d colours for %d dates: not a ramp", name, len(colours), len(rat.Row))
	}
}
