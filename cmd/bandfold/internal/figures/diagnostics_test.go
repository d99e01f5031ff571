package figures

import (
	"bytes"
	"image/png"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestDiagnostics draws a chi-square sample with a few outliers and checks
// the PNG's size (diagWidth x diagHeight, known by construction) and that
// bad input is refused.
func TestDiagnostics(t *testing.T) {
	chi := distuv.ChiSquared{K: 3, Src: rand.New(rand.NewPCG(1, 1))}
	z := make([]float64, 5000)
	for i := range z {
		z[i] = chi.Rand()
	}
	z[0], z[1] = 1e4, 5e3
	data, err := Diagnostics(DiagnosticsData{Z: z, K: 3, Threshold: 16.27})
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != diagWidth || b.Dy() != diagHeight {
		t.Errorf("size %v, want %dx%d", b, diagWidth, diagHeight)
	}
	if _, err := Diagnostics(DiagnosticsData{Z: z[:1], K: 3}); err == nil {
		t.Error("one Z value: no error")
	}
}
