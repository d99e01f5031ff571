package learn_test

import (
	"encoding/json"
	"fmt"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/transform"
)

// rotatedBasis fits a basis to the covariance C = sum_i lambda_i v_i v_iᵀ of
// three bands, with the orthonormal eigenvectors and distinct eigenvalues
// of rotatedVectors and rotatedValues, keeping k components.
func rotatedBasis(t *testing.T, k int) *transform.Basis {
	t.Helper()
	p := len(rotatedValues)
	cov := mat.NewSymDense(p, nil)
	for i, v := range rotatedVectors {
		for a := range p {
			for b := a; b < p; b++ {
				cov.SetSym(a, b, cov.At(a, b)+rotatedValues[i]*v[a]*v[b])
			}
		}
	}
	var bs []transform.Band
	for j, name := range rotatedNames {
		bs = append(bs, transform.Band{Name: name, Source: "rotated.tif", Index: j + 1, DataType: "Float32", Scale: 1})
	}
	b, err := transform.NewBasis(transform.Covariance, bs, 100, []float64{0, 0, 0}, cov)
	if err != nil {
		t.Fatal(err)
	}
	b.Components = k
	return b
}

// The eigen-structure of rotatedBasis, known by construction: a rotation
// of bands 1 and 2 by the 3-4-5 triangle and band 3 alone. The
// largest-magnitude loading of each vector is positive, the sign Decompose
// chooses, so the fitted eigenvectors equal these rows.
var (
	rotatedNames   = []string{"red", "nir", "swir"}
	rotatedValues  = []float64{6, 3, 1}
	rotatedVectors = [][]float64{{0.6, 0.8, 0}, {0.8, -0.6, 0}, {0, 0, 1}}
)

func TestInspectLoadings(t *testing.T) {
	for _, k := range []int{1, 2, 3} {
		dir := t.TempDir()
		path := filepath.Join(dir, "rotated.basis.json")
		b := rotatedBasis(t, k)
		if err := jobkit.WriteBasis(b, path, false); err != nil {
			t.Fatal(err)
		}
		res, err := learn.Inspect(t.Context(), jobtest.TestEnv, learn.InspectOptions{Basis: path})
		if err != nil {
			t.Fatal(err)
		}
		s := res.Summary
		if len(s.Loadings) != k {
			t.Fatalf("k=%d: %d loading vectors, want the %d kept (known by construction)", k, len(s.Loadings), k)
		}
		for i, vec := range s.Loadings {
			if len(vec) != len(rotatedNames) {
				t.Fatalf("k=%d: PC%d has %d loadings, want one per band (%d)", k, i+1, len(vec), len(rotatedNames))
			}
			for j, v := range vec {
				// Equal to the basis read back, bit for bit: the loadings
				// are its eigenvectors, component-major (known by
				// construction).
				if v != res.Basis.Eigenvectors[i][j] {
					t.Errorf("k=%d: loading of band %d on PC%d = %v, the basis's eigenvector has %v", k, j+1, i+1, v, res.Basis.Eigenvectors[i][j])
				}
				// And to the vectors the covariance was built from, to
				// rounding of the eigen solver (unit vectors, so absolute).
				if want := rotatedVectors[i][j]; math.Abs(v-want) > 1e-12 {
					t.Errorf("k=%d: loading of band %d on PC%d = %v, want %v (known by construction)", k, j+1, i+1, v, want)
				}
			}
		}
		// The summary holds copies: changing them leaves the basis alone.
		s.Loadings[0][0] = 42
		if res.Basis.Eigenvectors[0][0] == 42 {
			t.Errorf("k=%d: the summary's loadings share memory with the basis", k)
		}
	}
}

func TestInspectJSON(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "rotated.basis.json")
	if err := jobkit.WriteBasis(rotatedBasis(t, 2), path, false); err != nil {
		t.Fatal(err)
	}
	res, err := learn.Inspect(t.Context(), jobtest.TestEnv, learn.InspectOptions{Basis: path})
	if err != nil {
		t.Fatal(err)
	}
	// The command prints the summary with encoding/json.
	data, err := json.Marshal(res.Summary)
	if err != nil {
		t.Fatal(err)
	}
	var got struct {
		BandNames []string    `json:"band_names"`
		Loadings  [][]float64 `json:"loadings"`
	}
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(data, &keys); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"loadings", "band_names"} {
		if _, ok := keys[key]; !ok {
			t.Errorf("the JSON summary lacks %q: %s", key, data)
		}
	}
	if err := json.Unmarshal(data, &got); err != nil {
		t.Fatal(err)
	}
	// Band names and k = 2 loading vectors of 3 bands: known by
	// construction (rotatedBasis).
	if len(got.BandNames) != len(rotatedNames) {
		t.Fatalf("band_names = %q, want %q", got.BandNames, rotatedNames)
	}
	for j, n := range rotatedNames {
		if got.BandNames[j] != n {
			t.Errorf("band_names[%d] = %q, want %q (known by construction)", j, got.BandNames[j], n)
		}
	}
	if len(got.Loadings) != 2 {
		t.Fatalf("loadings has %d vectors, want the 2 kept: %s", len(got.Loadings), data)
	}
	for i, vec := range got.Loadings {
		for j, v := range vec {
			// JSON round-trips float64 exactly (shortest representation).
			if v != res.Basis.Eigenvectors[i][j] {
				t.Errorf("loadings[%d][%d] = %v, want the eigenvector's %v", i, j, v, res.Basis.Eigenvectors[i][j])
			}
		}
	}
}

// TestInspectPlotsRate: with --plots and a budget, inspect writes rate.png
// (a PNG of the figure's 1000 x 600 pixels) and report.html holds the rate
// table and that figure. For rotatedBasis (eigenvalues 6, 3, 1 over 100
// pixels, unit gains: known by construction) keeping k = 1 costs a
// truncation RMSE of √((3 + 1) x 99/100 / 3).
func TestInspectPlotsRate(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "rotated.basis.json")
	if err := jobkit.WriteBasis(rotatedBasis(t, 2), path, false); err != nil {
		t.Fatal(err)
	}
	plots := filepath.Join(dir, "plots")
	res, err := learn.Inspect(t.Context(), jobtest.TestEnv, learn.InspectOptions{Basis: path, Plots: plots, MaxRMSE: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	if want := math.Sqrt(4 * 0.99 / 3); math.Abs(res.Summary.Rate[0].TruncationRMSE-want) > 1e-12 {
		t.Errorf("k = 1 truncation RMSE %v, want %v", res.Summary.Rate[0].TruncationRMSE, want)
	}
	f, err := os.Open(filepath.Join(plots, "rate.png"))
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := png.DecodeConfig(f)
	f.Close()
	if err != nil || cfg.Width != 1000 || cfg.Height != 600 {
		t.Errorf("rate.png: %+v, %v; want a 1000 x 600 PNG", cfg, err)
	}
	html, err := os.ReadFile(filepath.Join(plots, "report.html"))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Rate and distortion by kept components", fmt.Sprintf("%.6g", res.Summary.Rate[0].TruncationRMSE), "rate.png: estimated size ratio", "data:image/png;base64,"} {
		if !strings.Contains(string(html), want) {
			t.Errorf("report.html lacks %q", want)
		}
	}
}
