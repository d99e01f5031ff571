package learn_test

import (
	"archive/zip"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/transform"
)

// TestLearnMatchesInMemoryReference checks the streaming basis against
// gonum's in-memory stat.CovarianceMatrix and stat.PC (a general-purpose
// reference library) on the real Landsat subset, to 1e-10 relative, for
// several tile sizes and worker counts. Tilings sum in different orders, so
// only agreement to rounding is expected here; bit-for-bit equality across
// worker counts at one tiling is TestLearnIsIdenticalForAnyWorkerCount's.
func TestLearnMatchesInMemoryReference(t *testing.T) {
	jobtest.NeedLandsat(t)
	x := jobtest.ReadValid(t, jobtest.Landsat)
	var cov mat.SymDense
	stat.CovarianceMatrix(&cov, x, nil)
	var pc stat.PC
	if !pc.PrincipalComponents(x, nil) {
		t.Fatal("gonum PC failed")
	}
	wantVals := pc.VarsTo(nil)
	var wantVecs mat.Dense
	pc.VectorsTo(&wantVecs)
	r, c := x.Dims()

	dir := t.TempDir()
	tests := []struct {
		workers, tile int
	}{
		{1, 0}, // tiles aligned to the file's blocks
		{2, 64},
		{7, 33}, // tiles that do not divide the image
	}
	for _, tc := range tests {
		name := fmt.Sprintf("workers %d tile %d", tc.workers, tc.tile)
		out := filepath.Join(dir, fmt.Sprintf("w%d-t%d.json", tc.workers, tc.tile))
		b := jobtest.Learn(t, jobtest.WorkersEnv(tc.workers), learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: tc.tile}, Out: out}).Basis
		// Pixel and band counts: those of the matrix gonum was given.
		if b.Pixels != int64(r) || len(b.Bands) != c {
			t.Fatalf("%s: %d pixels %d bands, want %d and %d", name, b.Pixels, len(b.Bands), r, c)
		}
		for i := range c {
			for j := range c {
				// Covariance: gonum's stat.CovarianceMatrix.
				if !jobtest.RelClose(b.Covariance[i][j], cov.At(i, j), 1e-10) {
					t.Fatalf("%s: cov[%d][%d] = %v, gonum %v", name, i, j, b.Covariance[i][j], cov.At(i, j))
				}
			}
			// Eigenvalues: gonum's stat.PC variances.
			if !jobtest.RelClose(b.Eigenvalues[i], wantVals[i], 1e-10) {
				t.Errorf("%s: eigenvalue %d = %v, gonum %v", name, i, b.Eigenvalues[i], wantVals[i])
			}
			// Eigenvectors: gonum's stat.PC vectors, which agree up to sign.
			dot := 0.0
			for j := range c {
				dot += b.Eigenvectors[i][j] * wantVecs.At(j, i)
			}
			if !jobtest.RelClose(math.Abs(dot), 1, 1e-10) {
				t.Errorf("%s: eigenvector %d differs from gonum's: |dot| = %v", name, i, math.Abs(dot))
			}
		}
	}
}

// TestLearnIsIdenticalForAnyWorkerCount: 1, 2 and 7 workers at the same
// tiling give the same numbers to the last bit (results are merged in tile
// order), and the basis file written holds exactly the returned basis.
func TestLearnIsIdenticalForAnyWorkerCount(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	bases := map[int]*transform.Basis{}
	for _, w := range []int{1, 2, 7} {
		out := filepath.Join(dir, fmt.Sprintf("w%d.json", w))
		res := jobtest.Learn(t, jobtest.WorkersEnv(w), learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: 40},
			Out: out, Mode: transform.Correlation})
		read, err := transform.ReadBasis(out)
		if err != nil {
			t.Fatal(err)
		}
		// The fingerprint hashes the IEEE 754 bits of every fitted number.
		if read.Fingerprint() != res.Basis.Fingerprint() || read.Components != res.Basis.Components {
			t.Errorf("workers %d: %s holds basis %s (k=%d), Learn returned %s (k=%d)", w, out,
				read.Fingerprint(), read.Components, res.Basis.Fingerprint(), res.Basis.Components)
		}
		bases[w] = res.Basis
	}
	one := bases[1]
	for _, w := range []int{2, 7} {
		b := bases[w]
		if b.Pixels != one.Pixels || b.Components != one.Components {
			t.Errorf("workers %d: %d pixels k=%d, 1 worker %d pixels k=%d", w, b.Pixels, b.Components, one.Pixels, one.Components)
		}
		for i := range b.Mean {
			if b.Mean[i] != one.Mean[i] || b.StdDev[i] != one.StdDev[i] || b.Eigenvalues[i] != one.Eigenvalues[i] {
				t.Fatalf("workers %d: band %d differs bitwise from 1 worker", w, i)
			}
			for j := range b.Mean {
				if b.Covariance[i][j] != one.Covariance[i][j] || b.Eigenvectors[i][j] != one.Eigenvectors[i][j] {
					t.Fatalf("workers %d: matrices differ bitwise from 1 worker at %d,%d", w, i, j)
				}
			}
		}
	}
}

// TestLearnAgreesWithGDALStatistics compares per-band means, standard
// deviations, minima and maxima with GDAL's own statistics (gdalinfo -json
// -stats, an outside check). GDAL reports the population standard
// deviation, so the basis's sample sd s is compared as s * sqrt((n-1)/n).
func TestLearnAgreesWithGDALStatistics(t *testing.T) {
	jobtest.NeedLandsat(t)
	if _, err := exec.LookPath("gdalinfo"); err != nil {
		t.Skip("gdalinfo missing (Debian's gdal-bin)")
	}
	cmd := exec.Command("gdalinfo", "-json", "-stats", jobtest.Landsat)
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
	b, _ := jobtest.LearnLandsat(t, t.TempDir())
	n := float64(b.Pixels)
	if len(info.Bands) != len(b.Mean) {
		t.Fatalf("GDAL reports %d bands, the basis has %d", len(info.Bands), len(b.Mean))
	}
	for i, band := range info.Bands {
		gdal := func(key string) float64 {
			v, err := strconv.ParseFloat(band.Metadata[""][key], 64)
			if err != nil {
				t.Fatalf("band %d %s: %v", i+1, key, err)
			}
			return v
		}
		if mean := gdal("STATISTICS_MEAN"); !jobtest.RelClose(b.Mean[i], mean, 1e-10) {
			t.Errorf("band %d mean %v, GDAL %v", i+1, b.Mean[i], mean)
		}
		if got, sd := b.StdDev[i]*math.Sqrt((n-1)/n), gdal("STATISTICS_STDDEV"); !jobtest.RelClose(got, sd, 1e-10) {
			t.Errorf("band %d population sd %v, GDAL %v", i+1, got, sd)
		}
		// Extremes of Byte values are exact.
		if lo, hi := gdal("STATISTICS_MINIMUM"), gdal("STATISTICS_MAXIMUM"); b.Bands[i].Min != lo || b.Bands[i].Max != hi {
			t.Errorf("band %d range [%v, %v], GDAL [%v, %v]", i+1, b.Bands[i].Min, b.Bands[i].Max, lo, hi)
		}
		// Every pixel is valid: GDAL's valid percentage.
		if v := gdal("STATISTICS_VALID_PERCENT"); v != 100 {
			t.Errorf("band %d: GDAL finds %v%% valid", i+1, v)
		}
	}
	if b.Pixels != jobtest.LandsatPixels {
		t.Errorf("%d pixels, want %d", b.Pixels, jobtest.LandsatPixels)
	}
}

// TestLearnSummary checks the result's summary of a basis: counts known by
// construction, shares computed from the eigenvalues.
func TestLearnSummary(t *testing.T) {
	jobtest.NeedLandsat(t)
	out := filepath.Join(t.TempDir(), "b.json")
	res := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Out: out, Components: 2})
	s := res.Summary
	// The Landsat subset's size and band count (gdalinfo), the chosen k.
	if s.Pixels != jobtest.LandsatPixels || s.Bands != 6 || len(s.BandNames) != 6 || s.Components != 2 || s.Mode != "covariance" || s.Basis != out || res.Path != out {
		t.Errorf("summary %+v, path %s", s, res.Path)
	}
	if res.Partial != nil {
		t.Error("a basis run returned partial statistics")
	}
	// Known by construction: shares of the eigenvalues, summing to 1.
	total := 0.0
	for _, v := range s.Eigenvalues {
		total += v
	}
	sum := 0.0
	for i, e := range s.Explained {
		sum += e
		if !jobtest.RelClose(e, s.Eigenvalues[i]/total, 1e-12) || !jobtest.RelClose(s.Cumulative[i], sum, 1e-12) {
			t.Errorf("component %d: explained %v cumulative %v, eigenvalue share %v running sum %v", i+1, e, s.Cumulative[i], s.Eigenvalues[i]/total, sum)
		}
	}
	if len(s.Explained) != 6 || !jobtest.RelClose(s.Cumulative[5], 1, 1e-12) {
		t.Errorf("explained %v cumulative %v", s.Explained, s.Cumulative)
	}
	if s.Kaiser != nil {
		t.Error("covariance mode reports a Kaiser count")
	}
	// The members the command prints with --json.
	js, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	var members map[string]any
	if err := json.Unmarshal(js, &members); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"basis", "pixels", "bands", "band_names", "mode", "eigenvalues", "explained", "cumulative", "components", "broken_stick"} {
		if _, ok := members[key]; !ok {
			t.Errorf("summary lacks %q: %s", key, js)
		}
	}
	// With --variance the fewest components reaching it: ComponentsFor.
	res = jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Out: filepath.Join(t.TempDir(), "v.json"), Variance: 0.9})
	if want := transform.ComponentsFor(res.Basis.Eigenvalues, 0.9); res.Summary.Components != want || res.Basis.Components != want {
		t.Errorf("--variance 0.9 keeps %d (basis %d), want %d", res.Summary.Components, res.Basis.Components, want)
	}
}

// TestShardsMergeToTheSingleRun: three shards merged (in any order) equal
// one run to 1e-12 relative; merge refuses a missing, duplicated or foreign
// shard, saying which, and writes nothing.
func TestShardsMergeToTheSingleRun(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	single := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: 50}, Out: filepath.Join(dir, "single.json")}).Basis
	partial := func(name string, i int, o learn.LearnOptions) string {
		t.Helper()
		o.Scenes, o.Partial, o.Shard = []string{jobtest.Landsat}, filepath.Join(dir, name), jobkit.Shard{I: i, N: 3}
		o.Input.Tile = 50
		res := jobtest.Learn(t, jobtest.TestEnv, o)
		if res.Partial == nil || res.Basis != nil || res.Partial.Shard != i || res.Partial.Shards != 3 {
			t.Fatalf("shard %d/3: result %+v", i, res)
		}
		return res.Path
	}
	var parts []string
	var count float64
	for i := range 3 {
		p := partial(fmt.Sprintf("part%d.json", i), i, learn.LearnOptions{})
		read, err := transform.ReadPartial(p)
		if err != nil {
			t.Fatal(err)
		}
		count += read.State.Count
		parts = append(parts, p)
	}
	// The shards split the pixels: their counts add up to the image.
	if count != jobtest.LandsatPixels {
		t.Errorf("shards hold %v pixels, want %d", count, jobtest.LandsatPixels)
	}
	mergedPath := filepath.Join(dir, "merged.json")
	res, err := learn.Merge(t.Context(), jobtest.TestEnv, learn.MergeOptions{Parts: []string{parts[2], parts[0], parts[1]}, Out: mergedPath, Variance: jobtest.DefaultVariance})
	if err != nil {
		t.Fatal(err)
	}
	merged := res.Basis
	if read, err := transform.ReadBasis(mergedPath); err != nil {
		t.Fatal(err)
	} else if read.Fingerprint() != merged.Fingerprint() {
		t.Errorf("%s holds basis %s, Merge returned %s", mergedPath, read.Fingerprint(), merged.Fingerprint())
	}
	// The single run is the reference: the same counts and, since the
	// subset's bytes are integers summed exactly (bands.NewExactAccumulator),
	// the same basis bit for bit, whatever the shards and their tiles.
	if single.Pixels != merged.Pixels || single.Components != merged.Components {
		t.Fatalf("pixels %d/%d components %d/%d", single.Pixels, merged.Pixels, single.Components, merged.Components)
	}
	if single.Fingerprint() != merged.Fingerprint() {
		t.Errorf("merged basis %s differs from the single run's %s", merged.Fingerprint(), single.Fingerprint())
	}
	if other := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: 512}, Out: filepath.Join(dir, "t512.json")}).Basis; other.Fingerprint() != single.Fingerprint() {
		t.Errorf("tile 512: basis %s differs from tile 50's %s", other.Fingerprint(), single.Fingerprint())
	}

	foreign := partial("foreign.json", 2, learn.LearnOptions{Input: jobkit.Input{Bands: []int{1, 2, 3, 4, 5}}})
	otherMode := partial("mode.json", 2, learn.LearnOptions{Mode: transform.Correlation})
	tests := []struct {
		name  string
		parts []string
		want  []string // distinctive parts of transform.CheckSet's message
	}{
		{"missing", []string{parts[0], parts[1]}, []string{"shard 2 of 3 missing"}},
		{"duplicated", []string{parts[0], parts[1], parts[1], parts[2]}, []string{"shard 1 of 3 duplicated", "part1.json"}},
		{"foreign", []string{parts[0], parts[1], foreign}, []string{"foreign.json", "shard 2 is foreign: 5 bands", "shard 2 of 3 missing"}},
		{"mode", []string{parts[0], parts[1], otherMode}, []string{"mode.json", "shard 2 is foreign: mode correlation"}},
	}
	for _, tc := range tests {
		out := filepath.Join(dir, tc.name+".basis.json")
		res, err := learn.Merge(t.Context(), jobtest.TestEnv, learn.MergeOptions{Parts: tc.parts, Out: out, Variance: jobtest.DefaultVariance})
		if res != nil {
			t.Errorf("%s: merge returned a basis", tc.name)
		}
		jobtest.WantError(t, tc.name, err, false, tc.want...)
		jobtest.MustNotExist(t, tc.name, out)
	}
	jobtest.NoTemporaries(t, dir)
}

// TestVirtualPathInput reads the Landsat subset through GDAL's /vsizip/
// virtual file system: the same basis, bit for bit, as from the plain file.
func TestVirtualPathInput(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	data, err := os.ReadFile(jobtest.Landsat)
	if err != nil {
		t.Fatal(err)
	}
	plain := filepath.Join(dir, "l7.tif")
	if err := os.WriteFile(plain, data, 0o644); err != nil {
		t.Fatal(err)
	}
	zipPath := filepath.Join(dir, "l7.zip")
	zf, err := os.Create(zipPath)
	if err != nil {
		t.Fatal(err)
	}
	zw := zip.NewWriter(zf)
	w, err := zw.Create("l7.tif")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := w.Write(data); err != nil {
		t.Fatal(err)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	if err := zf.Close(); err != nil {
		t.Fatal(err)
	}
	virtual := "/vsizip/" + zipPath + "/l7.tif"
	a := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{virtual}, Out: filepath.Join(dir, "a.json")}).Basis
	b := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{plain}, Out: filepath.Join(dir, "b.json")}).Basis
	// The fingerprint hashes every fitted number's bits.
	if a.Fingerprint() != b.Fingerprint() || a.Pixels != b.Pixels || a.Pixels != jobtest.LandsatPixels {
		t.Errorf("/vsizip/ basis %s (%d pixels) differs from the plain file's %s (%d pixels)", a.Fingerprint(), a.Pixels, b.Fingerprint(), b.Pixels)
	}
	// A virtual input has no size or time to record.
	if len(a.Inputs) != 1 || a.Inputs[0].Path != virtual || a.Inputs[0].Size != -1 {
		t.Errorf("/vsizip/ input recorded as %+v", a.Inputs)
	}
}
