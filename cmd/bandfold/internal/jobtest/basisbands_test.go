package jobtest

import (
	"path/filepath"
	"reflect"
	"slices"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/tiles"
)

// TestChangeTakesTheBasisBands (issue 24, item 3): change --basis with a
// basis fitted on --bands 2-6 --exclude 2 of the real Landsat 7 subset
// (bands 2, 4, 5 and 6 of the file: --exclude counts within the
// selection) maps the same change, from the same no-change model, without
// --bands as with --bands 2,4-6 (known by construction: the same bands).
// The second date is the subset with correlated noise (NoisyCopy). Before,
// change took bands 1, 3, 4 and 5.
func TestChangeTakesTheBasisBands(t *testing.T) {
	NeedLandsat(t)
	dir := t.TempDir()
	after := filepath.Join(dir, "after.tif")
	NoisyCopy(t, after, 7, 0)
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{Landsat}, Input: jobkit.Input{Bands: []int{2, 3, 4, 5, 6}},
		Spectral: jobkit.Spectral{Exclude: []int{2}}, Components: 3, Out: basis})
	run := func(name string, bands []int) *pairchangeResult {
		r := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: Landsat, After: after, SharedOptions: series.SharedOptions{Basis: basis, Input: jobkit.Input{Bands: bands},
			Out: filepath.Join(dir, name)}})
		return &pairchangeResult{r.ValidPixels, r.ChangedPixels, r.Location, r.Covariance}
	}
	implied, given := run("implied", nil), run("given", []int{2, 4, 5, 6})
	if !reflect.DeepEqual(implied, given) {
		t.Errorf("change without --bands: %+v\nwith --bands 2,4-6: %+v", implied, given)
	}
}

// pairchangeResult is what TestChangeTakesTheBasisBands compares.
type pairchangeResult struct {
	Valid, Changed int64
	Location       []float64
	Covariance     [][]float64
}

// TestFoldTakesTheBasisBandsOfAProduct (issue 24, item 3): a basis fitted
// on bands of a Sentinel-2 product folder (the make testdata fixture s2a),
// chosen by number (--bands 2-5, of the product's 10 default bands) or by
// name (--bands B02,B03,B04,B8A), less --exclude 2, folds another product
// (s2b) without --bands into the values folded with the kept bands given
// (known by construction: the same bands).
func TestFoldTakesTheBasisBandsOfAProduct(t *testing.T) {
	a, b := product(t, s2a), product(t, s2b)
	dir := t.TempDir()
	for _, tc := range []struct {
		name         string
		learnt, kept jobkit.Input
	}{
		{"by number", jobkit.Input{Bands: []int{2, 3, 4, 5}}, jobkit.Input{Bands: []int{2, 4, 5}}},
		{"by name", jobkit.Input{BandNames: []string{"B02", "B03", "B04", "B8A"}}, jobkit.Input{BandNames: []string{"B02", "B04", "B8A"}}},
	} {
		basis := filepath.Join(dir, tc.name+".json")
		Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{a}, Input: tc.learnt, Spectral: jobkit.Spectral{Exclude: []int{2}}, Components: 2, Out: basis})
		implied := Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{b}, Basis: basis, Out: filepath.Join(dir, tc.name+".implied.tif")})
		given := Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{b}, Basis: basis, Input: tc.kept, Out: filepath.Join(dir, tc.name+".given.tif")})
		_, x, _ := ReadImage(t, implied.Output, tiles.Tile{})
		_, y, _ := ReadImage(t, given.Output, tiles.Tile{})
		if !slices.EqualFunc(x, y, func(p, q float64) bool { return p == q || p != p && q != q }) {
			t.Errorf("%s: folding %s without --bands differs from folding it with the kept bands", tc.name, b)
		}
	}
}
