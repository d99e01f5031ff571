package main

import (
	"archive/zip"
	"bytes"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/spf13/cobra"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// landsat is the real test scene: a Landsat 7 ETM+ 6-band subset (349 x 352,
// UTM, public-domain USGS imagery) shipped in Debian's r-cran-stars package as
// tif/L7_ETMs.tif and fetched by "make testdata".
const landsat = "../../testdata/external/L7_ETMs.tif"

func needLandsat(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(landsat); err != nil {
		t.Skip("testdata/external/L7_ETMs.tif missing: run make testdata")
	}
}

// bandfold runs the command line in-process and returns the exit code,
// stdout and stderr.
func bandfold(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

// mustRun runs a command that must succeed.
func mustRun(t *testing.T, args ...string) string {
	t.Helper()
	code, out, errs := bandfold(t, args...)
	if code != 0 {
		t.Fatalf("bandfold %s: exit %d: %s", strings.Join(args, " "), code, errs)
	}
	return out
}

func relClose(a, b, rel float64) bool {
	return math.Abs(a-b) <= rel*math.Max(math.Abs(a), math.Abs(b))
}

func TestEveryCommandHasHelpAndExample(t *testing.T) {
	root := newRootCommand(&globals{})
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		for _, sub := range c.Commands() {
			if sub.Hidden || sub.Name() == "help" || sub.Name() == "completion" {
				continue
			}
			if strings.TrimSpace(sub.Example) == "" {
				t.Errorf("%s has no example", sub.CommandPath())
			}
			path := strings.Fields(sub.CommandPath())[1:]
			code, out, errs := bandfold(t, append(path, "--help")...)
			if code != 0 || !strings.Contains(out, "Usage:") {
				t.Errorf("%s --help: exit %d, %s", sub.CommandPath(), code, errs)
			}
			walk(sub)
		}
	}
	walk(root)
}

func TestUsageAndRuntimeErrors(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	text := filepath.Join(dir, "notes.txt")
	os.WriteFile(text, []byte("not a raster"), 0o644)
	out := filepath.Join(dir, "b.json")
	tests := []badInput{
		{"no image", []string{"learn", "--out", out}, 2, "requires at least 1 arg"},
		{"no output", []string{"learn", landsat}, 2, "[out partial]"},
		{"unknown flag", []string{"learn", landsat, "--out", out, "--frobnicate"}, 2, "unknown flag"},
		{"bad variance", []string{"learn", landsat, "--out", out, "--variance", "1.5"}, 2, "--variance 1.5: must be in (0, 1]"},
		{"zero variance", []string{"learn", landsat, "--out", out, "--variance", "0"}, 2, "--variance 0"},
		{"too many components", []string{"learn", landsat, "--out", out, "--components", "7"}, 2, "--components 7: the images have only 6 bands"},
		{"bad mode", []string{"learn", landsat, "--out", out, "--mode", "spectral"}, 2, "spectral"},
		{"bad bands", []string{"learn", landsat, "--out", out, "--bands", "3-1"}, 2, "runs backwards"},
		{"band out of range", []string{"learn", landsat, "--out", out, "--bands", "1-9"}, 1, "band 7 selected but the stack has 6 bands"},
		{"one band", []string{"learn", landsat, "--out", out, "--bands", "2"}, 1, "has 1 band"},
		{"missing file", []string{"learn", filepath.Join(dir, "none.tif"), "--out", out}, 1, "none.tif: no such file"},
		{"not a raster", []string{"learn", text, "--out", out}, 1, "notes.txt: not a raster"},
		{"no valid pixels", []string{"learn", landsat, "--out", out, "--nodata", "-1e30", "--mask", landsat, "--bands", "1,2", "--stride", "1000"}, 1, "only 1 valid pixels"},
		{"output folder", []string{"learn", landsat, "--out", filepath.Join(dir, "no", "b.json")}, 1, "does not exist"},
		{"bad shard", []string{"learn", landsat, "--partial", out, "--shard", "4/4"}, 2, "need 0 <= I < N"},
		{"shard without partial", []string{"learn", landsat, "--out", out, "--shard", "1/4"}, 2, "--shard needs --partial"},
		{"bad workers", []string{"learn", landsat, "--out", out, "--workers", "0"}, 2, "--workers 0"},
		{"bad basis", []string{"inspect", text}, 1, "notes.txt"},
	}
	checkBadInputs(t, tests, out)
}

// badInput is a command line that must fail: with exit code code and one
// line on stderr containing want.
type badInput struct {
	name string
	args []string
	code int
	want string
}

// checkBadInputs runs each bad command line and checks its exit code, its
// one-line message and, when out is set, that nothing was written there.
func checkBadInputs(t *testing.T, tests []badInput, out string) {
	t.Helper()
	for _, tc := range tests {
		code, _, errs := bandfold(t, tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and one line containing %q", tc.name, code, errs, tc.code, tc.want)
		}
		if out == "" {
			continue
		}
		if _, err := os.Stat(out); err == nil {
			t.Fatalf("%s: wrote %s", tc.name, out)
		}
	}
}

// readImage reads window tl of every band of the raster at path (the whole
// image when tl has no size), pixel-major, with the validity flags.
func readImage(t *testing.T, path string, tl tiles.Tile) (*raster.Stack, []float64, []bool) {
	t.Helper()
	if err := raster.Init(raster.Config{}); err != nil {
		t.Fatal(err)
	}
	s, err := raster.Open([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if tl.W == 0 {
		tl = tiles.Tile{W: s.Width, H: s.Height}
	}
	buf := make([]float64, tl.Pixels()*s.Len())
	valid := make([]bool, tl.Pixels())
	if _, err := r.Read(tl, buf, valid); err != nil {
		t.Fatal(err)
	}
	return s, buf, valid
}

// readValid returns the valid pixels of the raster at path as an n x p
// matrix, for in-memory reference computations.
func readValid(t *testing.T, path string) *mat.Dense {
	t.Helper()
	s, buf, valid := readImage(t, path, tiles.Tile{})
	p := s.Len()
	var rows []float64
	for i, ok := range valid {
		if ok {
			rows = append(rows, buf[i*p:(i+1)*p]...)
		}
	}
	return mat.NewDense(len(rows)/p, p, rows)
}

// TestLearnMatchesInMemoryReference checks the streaming basis against
// gonum's in-memory stat.CovarianceMatrix and stat.PC (a general-purpose
// reference library) on the real Landsat subset, to 1e-10 relative, for
// several tile sizes and worker counts.
func TestLearnMatchesInMemoryReference(t *testing.T) {
	needLandsat(t)
	x := readValid(t, landsat)
	var cov mat.SymDense
	stat.CovarianceMatrix(&cov, x, nil)
	var pc stat.PC
	if !pc.PrincipalComponents(x, nil) {
		t.Fatal("gonum PC failed")
	}
	wantVals := pc.VarsTo(nil)
	var wantVecs mat.Dense
	pc.VectorsTo(&wantVecs)

	dir := t.TempDir()
	var first *transform.Basis
	for _, args := range [][]string{{"--workers", "1"}, {"--workers", "2", "--tile", "64"}, {"--workers", "7", "--tile", "33"}} {
		out := filepath.Join(dir, strings.Join(args, "")+".json")
		mustRun(t, append([]string{"learn", landsat, "--out", out, "--quiet"}, args...)...)
		b, err := transform.ReadBasis(out)
		if err != nil {
			t.Fatal(err)
		}
		r, c := x.Dims()
		if b.Pixels != int64(r) || len(b.Bands) != c {
			t.Fatalf("%v: %d pixels %d bands, want %d and %d", args, b.Pixels, len(b.Bands), r, c)
		}
		for i := range c {
			for j := range c {
				if !relClose(b.Covariance[i][j], cov.At(i, j), 1e-10) {
					t.Fatalf("%v: cov[%d][%d] = %v, gonum %v", args, i, j, b.Covariance[i][j], cov.At(i, j))
				}
			}
			if !relClose(b.Eigenvalues[i], wantVals[i], 1e-10) {
				t.Errorf("%v: eigenvalue %d = %v, gonum %v", args, i, b.Eigenvalues[i], wantVals[i])
			}
			// Eigenvectors agree up to sign.
			dot := 0.0
			for j := range c {
				dot += b.Eigenvectors[i][j] * wantVecs.At(j, i)
			}
			if !relClose(math.Abs(dot), 1, 1e-10) {
				t.Errorf("%v: eigenvector %d differs from gonum's: |dot| = %v", args, i, math.Abs(dot))
			}
		}
		// Tile size changes the order of additions, so only the same tiling is
		// bit-for-bit comparable; worker counts are compared below.
		if first == nil {
			first = b
		}
	}
}

// TestLearnIsIdenticalForAnyWorkerCount: 1, 2 and 7 workers give the same
// numbers to the last bit (results are merged in tile order).
func TestLearnIsIdenticalForAnyWorkerCount(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	var ref *transform.Basis
	for _, w := range []string{"1", "2", "7"} {
		out := filepath.Join(dir, w+".json")
		mustRun(t, "learn", landsat, "--out", out, "--quiet", "--tile", "40", "--workers", w, "--mode", "correlation")
		b, err := transform.ReadBasis(out)
		if err != nil {
			t.Fatal(err)
		}
		if ref == nil {
			ref = b
			continue
		}
		for i := range b.Mean {
			if b.Mean[i] != ref.Mean[i] || b.Eigenvalues[i] != ref.Eigenvalues[i] {
				t.Fatalf("workers %s: band %d differs bitwise", w, i)
			}
			for j := range b.Mean {
				if b.Covariance[i][j] != ref.Covariance[i][j] || b.Eigenvectors[i][j] != ref.Eigenvectors[i][j] {
					t.Fatalf("workers %s: matrices differ bitwise at %d,%d", w, i, j)
				}
			}
		}
	}
}

// TestLearnAgreesWithGDALStatistics compares per-band means and standard
// deviations with GDAL's own statistics (gdalinfo -json -stats, an outside
// check). GDAL reports the population standard deviation, so the basis's
// sample sd s is compared as s * sqrt((n-1)/n).
func TestLearnAgreesWithGDALStatistics(t *testing.T) {
	needLandsat(t)
	if _, err := exec.LookPath("gdalinfo"); err != nil {
		t.Skip("gdalinfo missing (Debian's gdal-bin)")
	}
	cmd := exec.Command("gdalinfo", "-json", "-stats", landsat)
	cmd.Env = append(os.Environ(), "GDAL_PAM_ENABLED=NO") // no .aux.xml in testdata
	raw, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	// The band metadata carries GDAL's statistics to 14 significant
	// digits (the "mean" and "stdDev" members are rounded to 3 decimals).
	var info struct {
		Bands []struct {
			Metadata map[string]map[string]string `json:"metadata"`
		} `json:"bands"`
	}
	if err := json.Unmarshal(raw, &info); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "b.json")
	mustRun(t, "learn", landsat, "--out", out, "--quiet")
	b, err := transform.ReadBasis(out)
	if err != nil {
		t.Fatal(err)
	}
	n := float64(b.Pixels)
	if len(info.Bands) != len(b.Mean) {
		t.Fatalf("GDAL reports %d bands", len(info.Bands))
	}
	for i, band := range info.Bands {
		mean, _ := strconv.ParseFloat(band.Metadata[""]["STATISTICS_MEAN"], 64)
		sd, _ := strconv.ParseFloat(band.Metadata[""]["STATISTICS_STDDEV"], 64)
		if !relClose(b.Mean[i], mean, 1e-10) {
			t.Errorf("band %d mean %v, GDAL %v", i+1, b.Mean[i], mean)
		}
		if got := b.StdDev[i] * math.Sqrt((n-1)/n); !relClose(got, sd, 1e-10) {
			t.Errorf("band %d population sd %v, GDAL %v", i+1, got, sd)
		}
	}
}

// TestShardsMergeToTheSingleRun: three shards merged equal one run to 1e-12
// relative; merge refuses a missing, duplicated or foreign shard.
func TestShardsMergeToTheSingleRun(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	single := filepath.Join(dir, "single.json")
	mustRun(t, "learn", landsat, "--out", single, "--quiet", "--tile", "50")
	var parts []string
	for i := range 3 {
		p := filepath.Join(dir, "part"+string(rune('0'+i))+".json")
		mustRun(t, "learn", landsat, "--partial", p, "--shard", string(rune('0'+i))+"/3", "--tile", "50", "--quiet")
		parts = append(parts, p)
	}
	merged := filepath.Join(dir, "merged.json")
	mustRun(t, "merge", parts[2], parts[0], parts[1], "--out", merged, "--quiet")
	a, _ := transform.ReadBasis(single)
	b, err := transform.ReadBasis(merged)
	if err != nil {
		t.Fatal(err)
	}
	if a.Pixels != b.Pixels || a.Components != b.Components {
		t.Fatalf("pixels %d/%d components %d/%d", a.Pixels, b.Pixels, a.Components, b.Components)
	}
	for i := range a.Eigenvalues {
		if math.Abs(a.Eigenvalues[i]-b.Eigenvalues[i]) > 1e-12*a.Eigenvalues[0] {
			t.Errorf("eigenvalue %d: single %v merged %v", i, a.Eigenvalues[i], b.Eigenvalues[i])
		}
	}

	foreign := filepath.Join(dir, "foreign.json")
	mustRun(t, "learn", landsat, "--partial", foreign, "--shard", "2/3", "--tile", "50", "--bands", "1-5", "--quiet")
	otherMode := filepath.Join(dir, "mode.json")
	mustRun(t, "learn", landsat, "--partial", otherMode, "--shard", "2/3", "--tile", "50", "--mode", "correlation", "--quiet")
	for name, set := range map[string][]string{
		"missing":    {parts[0], parts[1]},
		"duplicated": {parts[0], parts[1], parts[1], parts[2]},
		"foreign":    {parts[0], parts[1], foreign},
		"mode":       {parts[0], parts[1], otherMode},
	} {
		out := filepath.Join(dir, name+".basis.json")
		code, _, errs := bandfold(t, append([]string{"merge", "--out", out}, set...)...)
		if code == 0 {
			t.Errorf("merge accepted a %s shard", name)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%s: merge wrote a basis", name)
		}
		t.Logf("%s: %s", name, strings.TrimSpace(errs))
	}
}

func TestLearnJSONSummary(t *testing.T) {
	needLandsat(t)
	out := filepath.Join(t.TempDir(), "b.json")
	stdout := mustRun(t, "learn", landsat, "--out", out, "--json", "--components", "2")
	var s map[string]any
	if err := json.Unmarshal([]byte(stdout), &s); err != nil {
		t.Fatalf("stdout is not one JSON object: %v\n%s", err, stdout)
	}
	for _, key := range []string{"pixels", "bands", "band_names", "mode", "eigenvalues", "explained", "cumulative", "components", "broken_stick"} {
		if _, ok := s[key]; !ok {
			t.Errorf("summary lacks %q", key)
		}
	}
	if s["components"].(float64) != 2 || s["pixels"].(float64) != 349*352 {
		t.Errorf("summary %v", s)
	}
}

func TestMoreBadInputs(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	five := filepath.Join(dir, "five.tif")
	mustRun(t, "demo", "synth", "--bands", "5", "--width", "40", "--height", "30", "--out", five, "--quiet")
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	file := filepath.Join(dir, "plain")
	os.WriteFile(file, []byte("x"), 0o644)
	tests := []badInput{
		{"pooled band counts", []string{"learn", landsat, five, "--out", filepath.Join(dir, "p.json")}, 1, "pooled scenes need the same bands"},
		{"plots folder", []string{"inspect", basis, "--plots", filepath.Join(file, "plots")}, 1, "cannot be created"},
		{"few pixels", []string{"learn", five, "--stride", "20", "--out", filepath.Join(dir, "f.json")}, 1, "need at least bands + 1"},
		{"shard auto without scheduler", []string{"learn", landsat, "--partial", filepath.Join(dir, "x.json"), "--shard", "auto"}, 2, "no job array"},
		{"batch into unwritable folder", []string{"fold", landsat, "--basis", basis, "--out-dir", file}, 1, "does not exist"},
	}
	t.Setenv("SLURM_ARRAY_TASK_ID", "")
	t.Setenv("JOB_COMPLETION_INDEX", "")
	checkBadInputs(t, tests, "")
}

// TestVirtualPathInput reads the Landsat subset through GDAL's /vsizip/
// virtual file system: the same basis as from the plain file.
func TestVirtualPathInput(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	data, _ := os.ReadFile(landsat)
	os.WriteFile(filepath.Join(dir, "l7.tif"), data, 0o644)
	zf, err := os.Create(filepath.Join(dir, "l7.zip"))
	if err != nil {
		t.Fatal(err)
	}
	zw := zip.NewWriter(zf)
	w, _ := zw.Create("l7.tif")
	w.Write(data)
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	zf.Close()
	a, b := filepath.Join(dir, "a.json"), filepath.Join(dir, "b.json")
	mustRun(t, "learn", "/vsizip/"+filepath.Join(dir, "l7.zip")+"/l7.tif", "--out", a, "--quiet")
	mustRun(t, "learn", filepath.Join(dir, "l7.tif"), "--out", b, "--quiet")
	ba, _ := transform.ReadBasis(a)
	bb, _ := transform.ReadBasis(b)
	if ba.Eigenvalues[0] != bb.Eigenvalues[0] || ba.Pixels != bb.Pixels {
		t.Errorf("/vsizip/ basis differs: %v vs %v", ba.Eigenvalues[0], bb.Eigenvalues[0])
	}
}
