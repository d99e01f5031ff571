package fold_test

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/transform"
)

// budgetCase is a scene and a basis to fold to error budgets.
type budgetCase struct {
	name, scene string
	method      transform.Method
}

// budgetCases are the real Landsat 7 subset (Debian's r-cran-stars) and the
// invented scenario's hyperspectral cube (scenario.Catchment, 256 x 256 at
// 10 m, so 85 x 85 at 30 m), each with a PCA and an MNF basis.
func budgetCases(t *testing.T, dir string) []budgetCase {
	t.Helper()
	jobtest.NeedLandsat(t)
	hyper := jobtest.ScenarioFiles(t, dir, 256, 5).Hyper
	var out []budgetCase
	for _, sc := range []struct{ name, path string }{{"landsat", jobtest.Landsat}, {"hyper", hyper}} {
		for _, m := range []transform.Method{transform.PCA, transform.MNF} {
			out = append(out, budgetCase{name: sc.name + "-" + string(m), scene: sc.path, method: m})
		}
	}
	return out
}

// bandSpread is the root mean square of the band standard deviations, the
// scale of the budgets below.
func bandSpread(b *transform.Basis) float64 {
	s := 0.0
	for _, sd := range b.StdDev {
		s += sd * sd
	}
	return math.Sqrt(s / float64(len(b.StdDev)))
}

// TestBudgetIsMet: for budgets spread over a decade (1% to 10% of the
// bands' spread), the RMSE of the bands rebuilt from the codes written is
// at most the budget and at least 0.8 x the budget (the allocation aims at
// √(1 − BudgetMargin) ≈ 0.95 of it; 0.8 allows the high-resolution
// approximation's error for the coarsest kept components), and unfold
// --compare measures the same RMSE from the file to 1e-9 relative (both
// rebuild the same codes x step; only the summation order differs).
func TestBudgetIsMet(t *testing.T) {
	dir := t.TempDir()
	for _, c := range budgetCases(t, dir) {
		basis := filepath.Join(dir, c.name+".json")
		b := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{c.scene}, Method: c.method, Out: basis}).Basis
		for i, f := range []float64{0.01, 0.0215, 0.0464, 0.1} {
			budget := f * bandSpread(b)
			out := filepath.Join(dir, fmt.Sprintf("%s-%d.tif", c.name, i))
			res := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{c.scene}, Basis: basis, Out: out, Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: budget}})
			r := res.BudgetReport
			if r == nil {
				t.Fatalf("%s budget %.4g: no budget report", c.name, budget)
			}
			if r.AchievedRMSE > budget || r.AchievedRMSE < 0.8*budget {
				t.Errorf("%s budget %.4g: achieved %.4g (predicted %.4g, k %d, step %.4g, %d writes), want within [0.8, 1] x budget",
					c.name, budget, r.AchievedRMSE, r.PredictedRMSE, res.Components, r.Step, r.Attempts)
			}
			u, err := fold.Unfold(t.Context(), jobtest.TestEnv, fold.UnfoldOptions{Components: out, Basis: basis, Out: filepath.Join(dir, "r.tif"), Type: "float64", Compare: c.scene, Overwrite: true})
			if err != nil {
				t.Fatal(err)
			}
			if !jobtest.RelClose(u.RMSE, r.AchievedRMSE, 1e-9) {
				t.Errorf("%s budget %.4g: unfold measures %.10g, fold %.10g", c.name, budget, u.RMSE, r.AchievedRMSE)
			}
			if u.OverallPSNR == nil || r.AchievedPSNR == nil || !jobtest.RelClose(*u.OverallPSNR, *r.AchievedPSNR, 1e-9) {
				t.Errorf("%s: overall PSNR of unfold %v, of fold %v", c.name, u.OverallPSNR, r.AchievedPSNR)
			}
		}
	}
}

// TestBudgetSmallerThanInt16: at the RMSE that --type int16 with k = 3
// (fewer than the bands, where the int16 steps are far below the
// truncation error) achieves (measured by unfold --compare), a fold with that RMSE
// as its budget writes fewer bytes, at no higher error (the int16 codes
// spend 16 bits on steps far finer than the truncation error: known by
// construction of Int16Scaling).
func TestBudgetSmallerThanInt16(t *testing.T) {
	dir := t.TempDir()
	for _, c := range budgetCases(t, dir) {
		basis := filepath.Join(dir, c.name+".json")
		jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{c.scene}, Method: c.method, Components: 3, Out: basis})
		fixed := filepath.Join(dir, c.name+".int16.tif")
		jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{c.scene}, Basis: basis, Out: fixed, Type: "int16"})
		u, err := fold.Unfold(t.Context(), jobtest.TestEnv, fold.UnfoldOptions{Components: fixed, Basis: basis, Out: filepath.Join(dir, "r.tif"), Type: "float64", Compare: c.scene, Overwrite: true})
		if err != nil {
			t.Fatal(err)
		}
		res := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{c.scene}, Basis: basis, Out: filepath.Join(dir, c.name+".budget.tif"), Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: u.RMSE}})
		if res.AchievedRMSE > u.RMSE || res.BytesWritten >= u.ComponentsBytes {
			t.Errorf("%s: budget %.4g achieved %.4g in %d bytes (k %d, %s); int16 with k %d: %d bytes", c.name, u.RMSE, res.AchievedRMSE, res.BytesWritten, res.Components, res.Type, u.Components, u.ComponentsBytes)
		}
	}
}

// TestBudgetRefusals: each bad budget is a one-line usage error and
// nothing is written.
func TestBudgetRefusals(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	_, basis := jobtest.LearnLandsat(t, dir)
	out := filepath.Join(dir, "c.tif")
	for _, c := range []struct {
		o    fold.FoldOptions
		want string
	}{
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 0}}, "must be a positive number"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: -3}}, "must be a positive number"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetPSNR, Value: 0}}, "must be a positive number"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 1e-9}}, "store the original losslessly"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetPSNR, Value: 400}}, "store the original losslessly"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetNoise}}, "has no noise estimate"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 3}, Components: 2}, "with --components"},
		{fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 3}, Type: "int16"}, "with --type"},
	} {
		o := c.o
		o.Scenes, o.Basis, o.Out = []string{jobtest.Landsat}, basis, out
		_, err := fold.Fold(t.Context(), jobtest.TestEnv, o)
		jobtest.WantError(t, fmt.Sprint(o.Budget), err, true, c.want)
		jobtest.MustNotExist(t, "output", out)
	}
	jobtest.NoTemporaries(t, dir)
	if _, err := os.Stat(out); err == nil {
		t.Error("output written")
	}
}

// TestBudgetNoiseAndPSNR: --max-rmse noise on an MNF basis is the root mean
// square of the per-band noise standard deviations, and --min-psnr P is the
// RMSE peak x 10^(-P/20) (the definitions), both met.
func TestBudgetNoiseAndPSNR(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "mnf.json")
	b := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Method: transform.MNF, Out: basis}).Basis
	noise, err := b.NoiseRMS()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		bg   fold.Budget
		want float64
	}{
		{fold.Budget{Kind: fold.BudgetNoise}, noise},
		{fold.Budget{Kind: fold.BudgetPSNR, Value: 35}, b.PeakRange() * math.Pow(10, -35.0/20)},
	} {
		res := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Out: filepath.Join(dir, c.bg.Kind+".tif"), Budget: c.bg})
		if r := res.BudgetReport; !jobtest.RelClose(r.BudgetRMSE, c.want, 1e-12) || r.AchievedRMSE > r.BudgetRMSE {
			t.Errorf("%s: budget %v (want %v), achieved %v", c.bg, r.BudgetRMSE, c.want, r.AchievedRMSE)
		}
	}
}
