package learn_test

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"reflect"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/tiles"
	"bandfold/transform"
)

// TestMNFOnLandsat: on the Landsat 7 subset, the MNF basis satisfies
// Aᵀ Σ_N A = I and Aᵀ Σ A = diag(λ) to 1e-10 (Green et al. 1988's
// normalisation), its noise covariance equals gonum's in-memory
// stat.CovarianceMatrix of the same horizontal pixel-pair differences,
// halved, to 1e-12 relative, and the result is bit-identical for 1, 2 and
// 7 workers (tiles merged in tile order), for tile sizes 64 and 512 and for
// 3 merged shards (the subset's bytes are integers, summed exactly).
func TestMNFOnLandsat(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	run := func(name string, workers, tile int) *transform.Basis {
		t.Helper()
		return jobtest.Learn(t, jobtest.WorkersEnv(workers), learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: tile}, Method: transform.MNF,
			Out: filepath.Join(dir, name+".json")}).Basis
	}
	ref := run("w1", 1, 64)
	for _, w := range []int{2, 7} {
		b := run(fmt.Sprintf("w%d", w), w, 64)
		if b.Fingerprint() != ref.Fingerprint() || !slices.Equal(b.Eigenvalues, ref.Eigenvalues) {
			t.Errorf("%d workers: basis %s differs from 1 worker's %s", w, b.Fingerprint(), ref.Fingerprint())
		}
	}
	var parts []string
	for i := range 3 {
		o := learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: 64}, Method: transform.MNF, Partial: filepath.Join(dir, fmt.Sprintf("p%d.json", i)), Shard: jobkit.Shard{I: i, N: 3}}
		parts = append(parts, jobtest.Learn(t, jobtest.TestEnv, o).Path)
	}
	merged, err := learn.Merge(context.Background(), jobtest.TestEnv, learn.MergeOptions{Parts: parts, Out: filepath.Join(dir, "merged.json"), Variance: 0.99})
	if err != nil {
		t.Fatal(err)
	}
	want, pairs := inMemoryNoise(t)
	p := len(ref.Bands)
	for _, b := range []*transform.Basis{ref, run("t512", 2, 512), merged.Basis} {
		if !reflect.DeepEqual(b.NoiseCovariance, ref.NoiseCovariance) || !reflect.DeepEqual(b.Covariance, ref.Covariance) ||
			!slices.Equal(b.Eigenvalues, ref.Eigenvalues) || !reflect.DeepEqual(b.Eigenvectors, ref.Eigenvectors) {
			t.Errorf("tile 512 or merged shards: noise covariance, covariance or eigenpairs differ from 1 worker's at tile 64")
		}
		if b.NoisePairs != int64(pairs) {
			t.Errorf("noise pairs %d, want %d (enumerated in memory)", b.NoisePairs, pairs)
		}
		for i := range p {
			for j := range p {
				if d := math.Abs(b.NoiseCovariance[i][j] - want.At(i, j)); d > 1e-12*want.At(i, i) {
					t.Errorf("Σ_N[%d][%d] = %v, want %v (gonum in memory)", i, j, b.NoiseCovariance[i][j], want.At(i, j))
				}
			}
		}
		checkGeneralised(t, b, 1e-10)
	}
}

// inMemoryNoise computes ½ Cov of the horizontal differences of the whole
// Landsat subset with gonum, reading it in one window.
func inMemoryNoise(t *testing.T) (*mat.SymDense, int) {
	s, x, valid := jobtest.ReadImage(t, jobtest.Landsat, tiles.Tile{})
	p, w, h := s.Len(), s.Width, s.Height
	var rows []float64
	for i := range w * h {
		if i%w+1 < w && valid[i] && valid[i+1] {
			for j := range p {
				rows = append(rows, x[(i+1)*p+j]-x[i*p+j])
			}
		}
	}
	n := len(rows) / p
	cov := mat.NewSymDense(p, nil)
	stat.CovarianceMatrix(cov, mat.NewDense(n, p, rows), nil)
	cov.ScaleSym(0.5, cov)
	return cov, n
}

// checkGeneralised checks Aᵀ Σ_N A = I and Aᵀ Σ A = diag(λ) to tol
// (relative to 1 and λ₁).
func checkGeneralised(t *testing.T, b *transform.Basis, tol float64) {
	t.Helper()
	p := len(b.Bands)
	sym := func(m [][]float64) *mat.SymDense {
		s := mat.NewSymDense(p, nil)
		for i := range p {
			for j := i; j < p; j++ {
				s.SetSym(i, j, m[i][j])
			}
		}
		return s
	}
	a := mat.NewDense(p, p, nil)
	for i, row := range b.Eigenvectors {
		a.SetCol(i, row)
	}
	var an, ana, as, asa mat.Dense
	an.Mul(sym(b.NoiseCovariance), a)
	ana.Mul(a.T(), &an)
	as.Mul(sym(b.Covariance), a)
	asa.Mul(a.T(), &as)
	for i := range p {
		for j := range p {
			want, wantS := 0.0, 0.0
			if i == j {
				want, wantS = 1, b.Eigenvalues[i]
			}
			if math.Abs(ana.At(i, j)-want) > tol || math.Abs(asa.At(i, j)-wantS) > tol*b.Eigenvalues[0] {
				t.Errorf("[%d][%d]: AᵀΣ_N A = %v (want %v), AᵀΣA = %v (want %v)", i, j, ana.At(i, j), want, asa.At(i, j), wantS)
			}
		}
	}
}

// TestMNFBadInput: each refusal is one line and writes nothing.
func TestMNFBadInput(t *testing.T) {
	dir := t.TempDir()
	thin := filepath.Join(dir, "thin.tif")
	jobtest.Synth(t, thin, 3, 1, 40, 1)
	wide := filepath.Join(dir, "wide.tif")
	jobtest.Synth(t, wide, 3, 30, 20, 2)
	for _, tc := range []struct {
		name  string
		o     learn.LearnOptions
		usage bool
		want  string
	}{
		{"width 1", learn.LearnOptions{Scenes: []string{thin}, Method: transform.MNF}, false, "pairs of adjacent valid pixels"},
		{"exclude leaves 1", learn.LearnOptions{Scenes: []string{wide}, Spectral: jobkit.Spectral{Exclude: []int{1, 2}}}, true, "leave 1 of the 3 bands"},
		{"exclude beyond", learn.LearnOptions{Scenes: []string{wide}, Spectral: jobkit.Spectral{Exclude: []int{9}}}, true, "only 3 bands"},
		{"exclude-nm without wavelengths", learn.LearnOptions{Scenes: []string{wide}, Spectral: jobkit.Spectral{ExcludeNM: []transform.NMRange{{Lo: 1, Hi: 2}}}}, true, "no band wavelengths"},
		{"correlation", learn.LearnOptions{Scenes: []string{wide}, Method: transform.MNF, Mode: transform.Correlation}, true, "--mode correlation"},
		{"min-snr for pca", learn.LearnOptions{Scenes: []string{wide}, MinSNR: 1}, true, "--min-snr needs --method mnf"},
		// Issue 24, item 11: a --min-snr that cannot be right, or that
		// --components would override, is refused.
		{"min-snr nan", learn.LearnOptions{Scenes: []string{wide}, Method: transform.MNF, MinSNR: math.NaN()}, true, "--min-snr NaN: want a finite number, 0 or more"},
		{"min-snr inf", learn.LearnOptions{Scenes: []string{wide}, Method: transform.MNF, MinSNR: math.Inf(1)}, true, "--min-snr +Inf: want a finite number, 0 or more"},
		{"min-snr with components", learn.LearnOptions{Scenes: []string{wide}, Method: transform.MNF, MinSNR: 2, Components: 2}, true,
			"--min-snr with --components 2: give one rule for the number of components"},
	} {
		out := filepath.Join(dir, tc.name+".json")
		tc.o.Out = out
		if tc.o.Variance == 0 {
			tc.o.Variance = 0.99
		}
		if tc.o.Noise == 0 {
			tc.o.Noise = bands.Horizontal
		}
		_, err := learn.Learn(context.Background(), jobtest.TestEnv, tc.o)
		jobtest.WantError(t, tc.name, err, tc.usage, tc.want)
		jobtest.MustNotExist(t, tc.name, out)
	}
}
