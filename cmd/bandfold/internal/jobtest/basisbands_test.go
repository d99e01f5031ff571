package jobtest

import (
	"path/filepath"
	"reflect"
	"testing"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
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
		r := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: Landsat, After: after, Basis: basis, Input: jobkit.Input{Bands: bands},
			Out: filepath.Join(dir, name)})
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
