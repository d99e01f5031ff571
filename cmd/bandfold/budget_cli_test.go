package main

import (
	"path/filepath"
	"strings"
	"testing"
)

// TestBudgetBadInputs: every bad error budget of the error-budget issue is
// one line on stderr, exit 2 (a usage error), and nothing is written: a
// budget below what integer codes can reach (on the Landsat subset, 1e-9
// counts, which needs a step below Int32's reach), a non-positive budget,
// --max-rmse noise with a PCA basis (no noise estimate), a budget with
// --components or --type, and a budget with lossy creation options (issue
// 24, item 2).
func TestBudgetBadInputs(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis, out := filepath.Join(dir, "b.json"), filepath.Join(dir, "c.tif")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	fold := func(extra ...string) []string {
		return append([]string{"fold", landsat, "--basis", basis, "--out", out}, extra...)
	}
	checkBadInputs(t, []badInput{
		{"budget below lossless reach", fold("--max-rmse", "1e-9"), 2, "store the original losslessly"},
		{"psnr beyond lossless reach", fold("--min-psnr", "400"), 2, "store the original losslessly"},
		{"zero budget", fold("--max-rmse", "0"), 2, "must be a positive number"},
		{"negative budget", fold("--max-rmse", "-2"), 2, "must be a positive number"},
		{"negative psnr", fold("--min-psnr", "-5"), 2, "must be a positive number"},
		{"noise without estimate", fold("--max-rmse", "noise"), 2, "has no noise estimate"},
		{"budget with components", fold("--max-rmse", "3", "-k", "2"), 2, "with --type or --components"},
		{"budget with type", fold("--max-rmse", "3", "--type", "int16"), 2, "with --type or --components"},
		// Issue 24, item 2: creation options that store other values than
		// the codes whose error the budget proves.
		{"lerc max z error", fold("--max-rmse", "50", "--co", "COMPRESS=LERC", "--co", "MAX_Z_ERROR=40"), 2, "--max-rmse 50 with --co: MAX_Z_ERROR=40 makes COMPRESS=LERC lossy"},
		{"jpeg", fold("--max-rmse", "50", "--co", "COMPRESS=JPEG"), 2, "COMPRESS=JPEG is lossy"},
		{"psnr with webp", fold("--min-psnr", "30", "--co", "COMPRESS=WEBP"), 2, "COMPRESS=WEBP is lossy unless WEBP_LOSSLESS=YES"},
	}, out)
}

// TestUnfoldComparePrintsPSNRDefinition: unfold --compare states how its
// PSNR figures are defined beside them (the error-budget issue).
func TestUnfoldComparePrintsPSNRDefinition(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	basis, comps := filepath.Join(dir, "b.json"), filepath.Join(dir, "c.tif")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	mustRun(t, "fold", landsat, "--basis", basis, "--out", comps, "--quiet")
	code, _, errs := bandfold(t, "unfold", comps, "--basis", basis, "--out", filepath.Join(dir, "r.tif"), "--compare", landsat)
	for _, want := range []string{"overall psnr", "= 20 log10(peak / rmse), peak", "the largest band range (max - min of valid values) recorded in the basis", "mean psnr"} {
		if code != 0 || !strings.Contains(errs, want) {
			t.Errorf("unfold --compare: exit %d, stderr lacks %q:\n%s", code, want, errs)
		}
	}
}
