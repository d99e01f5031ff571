package learn_test

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
	"bandfold/transform"
)

// writeCube writes a width x height cube of p Float64 bands at path, with
// NaN as nodata, each value value(x, y, band).
func writeCube(t *testing.T, path string, width, height, p int, value func(x, y, b int) float64) {
	t.Helper()
	buf := make([]float64, 0, width*height*p)
	for y := range height {
		for x := range width {
			for b := range p {
				buf = append(buf, value(x, y, b))
			}
		}
	}
	nd := math.NaN()
	g := raster.Grid{Width: width, Height: height}
	jobtest.WriteRasterFile(t, path, raster.Spec{Grid: g, Bands: p, DataType: "Float64", NoData: &nd}, buf)
}

// TestLearnMessagesNameTheProblem (issue 24, item 10): learn's refusals name
// the file and the problem in the user's words, never the implementation
// ("invalid state", "comoment row", "invalid partial"), and do not advise
// what was already given. Values of about 1e300 (their squares pass the
// float64 range, so the sums overflow: known by construction) are refused
// naming the image, for a basis, an MNF basis, a partial and
// --suggest-exclude (which printed an SNR of NaN); a cube whose valid
// pixels have no valid neighbour in their row or column (a checkerboard
// of NaN) has no noise pairs with --noise both, and the message no longer
// says "try --noise both". Nothing is written.
func TestLearnMessagesNameTheProblem(t *testing.T) {
	dir := t.TempDir()
	huge, checker := filepath.Join(dir, "huge.tif"), filepath.Join(dir, "checker.tif")
	rng := rand.New(rand.NewPCG(1, 2))
	writeCube(t, huge, 20, 10, 3, func(int, int, int) float64 { return rng.NormFloat64() * 1e300 })
	writeCube(t, checker, 6, 6, 3, func(x, y, b int) float64 {
		if (x+y)%2 == 1 {
			return math.NaN()
		}
		return rng.NormFloat64() + float64(b)
	})
	tooLarge := "huge.tif: the values are too large to sum"
	internals := []string{"invalid state", "comoment", "invalid partial", "NaN"}
	for _, tc := range []struct {
		name   string
		o      learn.LearnOptions
		want   string
		absent []string
	}{
		{"huge values, basis", learn.LearnOptions{Scenes: []string{huge}}, tooLarge, internals},
		{"huge values, mnf", learn.LearnOptions{Scenes: []string{huge}, Method: transform.MNF}, tooLarge, internals},
		{"huge values, partial", learn.LearnOptions{Scenes: []string{huge}, Partial: filepath.Join(dir, "p.json")}, tooLarge, internals},
		{"huge values, suggest-exclude", learn.LearnOptions{Scenes: []string{huge}, SuggestExclude: true}, tooLarge, internals},
		{"no pairs either way", learn.LearnOptions{Scenes: []string{checker}, Method: transform.MNF, Noise: bands.Both},
			"checker.tif has 0 both pairs of adjacent valid pixels", []string{"try --noise both"}},
	} {
		out := filepath.Join(dir, "b.json")
		if tc.o.Partial == "" && !tc.o.SuggestExclude {
			tc.o.Out = out
		}
		tc.o.Variance = jobtest.DefaultVariance
		res, err := learn.Learn(t.Context(), jobtest.TestEnv, tc.o)
		jobtest.WantError(t, tc.name, err, false, tc.want)
		for _, a := range tc.absent {
			if err != nil && strings.Contains(err.Error(), a) {
				t.Errorf("%s: %q says %q", tc.name, err, a)
			}
		}
		if res != nil {
			t.Errorf("%s: result %+v", tc.name, res)
		}
		jobtest.MustNotExist(t, tc.name, out)
		jobtest.MustNotExist(t, tc.name, tc.o.Partial)
	}
}

// TestMergeRefusesInertMinSNR (issue 24, item 11): merge --min-snr keeps
// MNF components by their SNR; on principal component partials, which
// have none, it is refused as a usage error naming the partial, as is a
// --min-snr that is not a finite number of 0 or more, or that --components
// would override. Nothing is written. The partials are of an invented
// cube (Synth).
func TestMergeRefusesInertMinSNR(t *testing.T) {
	dir := t.TempDir()
	scene := filepath.Join(dir, "s.tif")
	jobtest.Synth(t, scene, 4, 30, 20, 5)
	pca := filepath.Join(dir, "pca.json")
	jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{scene}, Partial: pca})
	out := filepath.Join(dir, "b.json")
	for _, tc := range []struct {
		name string
		o    learn.MergeOptions
		want string
	}{
		{"pca partials", learn.MergeOptions{MinSNR: 2}, "--min-snr needs partials of learn --method mnf: " + pca + " holds principal component statistics"},
		{"nan", learn.MergeOptions{MinSNR: math.NaN()}, "--min-snr NaN: want a finite number, 0 or more"},
		{"with components", learn.MergeOptions{MinSNR: 2, Components: 2}, "--min-snr with --components 2"},
	} {
		o := tc.o
		o.Parts, o.Out, o.Variance = []string{pca}, out, jobtest.DefaultVariance
		_, err := learn.Merge(t.Context(), jobtest.TestEnv, o)
		jobtest.WantError(t, tc.name, err, true, tc.want)
		jobtest.MustNotExist(t, tc.name, out)
	}
}
