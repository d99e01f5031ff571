package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// TestComponentsAreUncorrelatedWithEigenvalueVariances checks, on the real
// Landsat 7 subset (Debian's r-cran-stars), the defining properties of
// principal components (common practice): the component images are
// uncorrelated (largest off-diagonal correlation below 1e-6, computed with
// gonum's stat.CorrelationMatrix) and the sample variance of component i
// equals eigenvalue i to 1e-6 relative.
func TestComponentsAreUncorrelatedWithEigenvalueVariances(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis, comps := filepath.Join(dir, "b.json"), filepath.Join(dir, "c.tif")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	mustRun(t, "fold", landsat, "--basis", basis, "--out", comps, "--components", "6", "--type", "float64", "--quiet")
	b, _ := transform.ReadBasis(basis)
	y := readValid(t, comps)
	var corr mat.SymDense
	stat.CorrelationMatrix(&corr, y, nil)
	worst := 0.0
	for i := range 6 {
		for j := range i {
			worst = math.Max(worst, math.Abs(corr.At(i, j)))
		}
		col := mat.Col(nil, i, y)
		if v := stat.Variance(col, nil); !relClose(v, b.Eigenvalues[i], 1e-6) {
			t.Errorf("component %d variance %v, eigenvalue %v", i+1, v, b.Eigenvalues[i])
		}
	}
	if worst >= 1e-6 {
		t.Errorf("largest off-diagonal correlation %g", worst)
	}
}

// TestFoldUnfoldRestoresWithinRounding: with every component, folding then
// unfolding to the original Byte type gives back the Landsat bands exactly
// (the reconstruction is within rounding of the original), and with int16
// components within the quantisation step.
func TestFoldUnfoldRestoresWithinRounding(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	for _, typ := range []string{"float32", "int16"} {
		comps, restored := filepath.Join(dir, typ+".c.tif"), filepath.Join(dir, typ+".r.tif")
		mustRun(t, "fold", landsat, "--basis", basis, "--out", comps, "-k", "6", "--type", typ, "--quiet")
		out := mustRun(t, "unfold", comps, "--basis", basis, "--out", restored, "--compare", landsat, "--json", "--quiet")
		var s map[string]any
		if err := json.Unmarshal([]byte(out), &s); err != nil {
			t.Fatal(err)
		}
		if s["rmse_written"].(float64) != 0 {
			t.Errorf("%s: written values differ from the original: rmse %v", typ, s["rmse_written"])
		}
		if s["max_abs_error"].(float64) >= 0.5 {
			t.Errorf("%s: max abs error %v not within rounding", typ, s["max_abs_error"])
		}
		if s["type"] != "Byte" {
			t.Errorf("%s: restored as %v, want the original Byte", typ, s["type"])
		}
	}
}

// TestReconstructionErrorIdentity checks the published identity of principal
// component reconstruction (e.g. Jolliffe, Principal Component Analysis,
// 2nd ed., sec. 3.5; common practice): on the pixels the basis was fitted
// on, sum ||x - x_hat||^2 = (n - 1) * (sum of the dropped eigenvalues), for
// k = 1..p-1 in covariance mode, through the float64 path, to 1e-9
// relative. The sum comes from unfold's own rmse: rmse^2 * n * p.
func TestReconstructionErrorIdentity(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	b, _ := transform.ReadBasis(basis)
	n, p := float64(b.Pixels), float64(len(b.Bands))
	for k := 1; k < len(b.Bands); k++ {
		ks := strconv.Itoa(k)
		comps, restored := filepath.Join(dir, ks+".c.tif"), filepath.Join(dir, ks+".r.tif")
		mustRun(t, "fold", landsat, "--basis", basis, "--out", comps, "-k", ks, "--type", "float64", "--quiet")
		out := mustRun(t, "unfold", comps, "--basis", basis, "--out", restored, "--type", "float64", "--compare", landsat, "--json", "--quiet")
		var s struct {
			RMSE float64 `json:"rmse"`
		}
		json.Unmarshal([]byte(out), &s)
		dropped := 0.0
		for _, v := range b.Eigenvalues[k:] {
			dropped += v
		}
		if sse := s.RMSE * s.RMSE * n * p; !relClose(sse, (n-1)*dropped, 1e-9) {
			t.Errorf("k=%d: sum of squared errors %v, (n-1) x dropped eigenvalues %v", k, sse, (n-1)*dropped)
		}
	}
}

func TestFoldReportsExplainedVarianceOnAnotherScene(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "b.json")
	// Fit on bands 1-3 against 4-6 of the same scene: a basis that does
	// not fit, so the scene's explained share must differ from the fit's.
	mustRun(t, "learn", landsat, "--bands", "1-3", "--out", basis, "--quiet", "-k", "1")
	out := mustRun(t, "fold", landsat, "--bands", "4-6", "--ignore-band-names", "--basis", basis, "--out", filepath.Join(dir, "c.tif"), "--json", "--quiet")
	var r foldResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if r.ExplainedFit <= 0 || r.ExplainedScene <= 0 || r.ExplainedScene >= r.ExplainedFit {
		t.Errorf("explained fit %v scene %v", r.ExplainedFit, r.ExplainedScene)
	}
	// The same scene: both shares agree (the scene is the fitting scene).
	out = mustRun(t, "fold", landsat, "--bands", "1-3", "--basis", basis, "--out", filepath.Join(dir, "d.tif"), "--json", "--quiet")
	json.Unmarshal([]byte(out), &r)
	if !relClose(r.ExplainedFit, r.ExplainedScene, 1e-9) {
		t.Errorf("fitting scene: explained fit %v scene %v", r.ExplainedFit, r.ExplainedScene)
	}
}

func TestFoldUnfoldBadInputs(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	basis5 := filepath.Join(dir, "b5.json")
	mustRun(t, "learn", landsat, "--bands", "1-5", "--out", basis5, "--quiet")
	comps := filepath.Join(dir, "c.tif")
	mustRun(t, "fold", landsat, "--basis", basis, "--out", comps, "-k", "6", "--quiet")
	broken := filepath.Join(dir, "broken.json")
	os.WriteFile(broken, []byte(`{"format": "bandfold-basis", "version": 1`), 0o644)
	other := filepath.Join(dir, "other.tif")
	mustRun(t, "demo", "synth", "--bands", "6", "--width", "40", "--height", "30", "--out", other, "--quiet")
	named := filepath.Join(dir, "named.tif")
	writeNamed(t, named, other, []string{"a", "b", "c", "d", "e", "f"})
	namedBasis := filepath.Join(dir, "named.json")
	mustRun(t, "learn", named, "--out", namedBasis, "--quiet")
	renamed := filepath.Join(dir, "renamed.tif")
	writeNamed(t, renamed, other, []string{"a", "b", "c", "e", "d", "f"})
	out := filepath.Join(dir, "out.tif")
	tests := []badInput{
		{"band count", []string{"fold", landsat, "--basis", basis5, "--out", out}, 1, "has 6 bands but the basis"},
		{"band names", []string{"fold", renamed, "--basis", namedBasis, "--out", out}, 1, "--ignore-band-names"},
		{"too many components", []string{"fold", landsat, "--basis", basis, "--out", out, "-k", "7"}, 2, "--components 7"},
		{"unreadable basis", []string{"fold", landsat, "--basis", broken, "--out", out}, 1, "broken.json"},
		{"missing basis", []string{"fold", landsat, "--basis", filepath.Join(dir, "none.json"), "--out", out}, 1, "none.json"},
		{"bad type", []string{"fold", landsat, "--basis", basis, "--out", out, "--type", "int8"}, 2, "--type"},
		{"components beyond basis", []string{"unfold", comps, "--basis", basis5, "--out", out}, 1, "has 6 bands but the basis"},
		{"compare grid", []string{"unfold", comps, "--basis", basis, "--out", out, "--compare", other}, 1, "not on the grid"},
		{"unfold bad basis", []string{"unfold", comps, "--basis", broken, "--out", out}, 1, "broken.json"},
	}
	checkBadInputs(t, tests, out)
}

func TestBatchFoldSkipsCompleteOutputsAndGoesOnAfterFailures(t *testing.T) {
	dir := t.TempDir()
	var scenes []string
	for i := range 3 {
		p := filepath.Join(dir, "scene"+strconv.Itoa(i)+".tif")
		mustRun(t, "demo", "synth", "--bands", "5", "--width", "64", "--height", "48", "--seed", strconv.Itoa(i+1), "--out", p, "--quiet")
		scenes = append(scenes, p)
	}
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", scenes[0], "--out", basis, "--quiet")
	outDir := filepath.Join(dir, "out")
	os.Mkdir(outDir, 0o755)
	list := filepath.Join(dir, "list.txt")
	os.WriteFile(list, []byte(scenes[1]+"\n"+filepath.Join(dir, "missing.tif")+"\n"), 0o644)

	code, out, _ := bandfold(t, "fold", scenes[0], "--list", list, "--basis", basis, "--out-dir", outDir, "--json", "--quiet")
	if code != 1 {
		t.Fatalf("a failed scene must give exit 1, got %d", code)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 4 {
		t.Fatalf("want 3 scene lines and a summary, got %q", out)
	}
	var last foldBatchSummary
	json.Unmarshal([]byte(lines[3]), &last)
	if last.Written != 2 || last.Failed != 1 || last.Scenes != 3 {
		t.Errorf("summary %+v", last)
	}
	// The rerun skips what is complete and writes what was missing.
	code, out, _ = bandfold(t, "fold", filepath.Join(dir, "scene*.tif"), "--basis", basis, "--out-dir", outDir, "--json", "--quiet")
	if code != 0 {
		t.Fatalf("rerun exit %d", code)
	}
	lines = strings.Split(strings.TrimSpace(out), "\n")
	json.Unmarshal([]byte(lines[len(lines)-1]), &last)
	if last.Skipped != 2 || last.Written != 1 {
		t.Errorf("rerun summary %+v", last)
	}
	// Shards split the list: 0/2 takes scenes 0 and 2.
	code, out, _ = bandfold(t, "fold", filepath.Join(dir, "scene*.tif"), "--basis", basis, "--out-dir", outDir, "--json", "--quiet", "--shard", "0/2", "--overwrite")
	lines = strings.Split(strings.TrimSpace(out), "\n")
	if code != 0 || len(lines) != 3 || !strings.Contains(lines[0], "scene0") || !strings.Contains(lines[1], "scene2") {
		t.Errorf("shard 0/2: exit %d, %q", code, out)
	}
}

// writeNamed copies the pixels of src to path with the given band
// descriptions.
func writeNamed(t *testing.T, path, src string, names []string) {
	t.Helper()
	x := readValid(t, src)
	s, err := raster.Open([]string{src})
	if err != nil {
		t.Fatal(err)
	}
	o, err := raster.Create(path, raster.Spec{Grid: s.Grid, Bands: len(names), DataType: "Float32", Descriptions: names})
	if err != nil {
		t.Fatal(err)
	}
	if err := o.Write(tiles.Tile{W: s.Width, H: s.Height}, x.RawMatrix().Data); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
}
