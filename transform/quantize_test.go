package transform

import (
	"math"
	"testing"
)

func TestInt16Scaling(t *testing.T) {
	for _, tc := range []struct {
		eigenvalue, scale float64
	}{
		{1, 16.0 / 32767},                          // σ = 1: 16σ onto 32767
		{202.0922, 16 * 14.21591361819563 / 32767}, // an arbitrary eigenvalue; σ = √202.0922 = 14.21591361819563 (float64, correctly rounded)
		{0, 1}, // zero variance: scale 1 by definition
	} {
		scale, offset := Int16Scaling(tc.eigenvalue)
		checkRel(t, "scale", scale, tc.scale, 0, 1e-15)
		if offset != 0 {
			t.Errorf("offset %v, want 0", offset)
		}
	}
	for _, bad := range []float64{-1, math.NaN(), math.Inf(1)} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("Int16Scaling(%v) did not panic", bad)
				}
			}()
			Int16Scaling(bad)
		}()
	}
}

func TestQuantizeInt16(t *testing.T) {
	scale, offset := Int16Scaling(4) // σ = 2, scale = 32/32767
	for _, tc := range []struct {
		v    float64
		want int16
	}{
		{0, 0},
		{32, 32767},     // +16σ
		{-32, -32767},   // −16σ
		{1000, 32767},   // saturates
		{-1000, -32767}, // saturates short of nodata
		{math.Inf(-1), -32767},
		{math.NaN(), Int16NoData},
		{1.5 * scale, 2}, // half away from zero
		{-1.5 * scale, -2},
	} {
		if got := QuantizeInt16(tc.v, scale, offset); got != tc.want {
			t.Errorf("QuantizeInt16(%v) = %d, want %d", tc.v, got, tc.want)
		}
	}
	// The round trip error is at most half a step.
	for v := -30.0; v <= 30; v += 0.37 {
		back := float64(QuantizeInt16(v, scale, offset))*scale + offset
		if math.Abs(back-v) > scale/2*(1+1e-12) {
			t.Errorf("%v stored as %v: error above half a step %v", v, back, scale/2)
		}
	}
}

// TestScoreBoundHoldsForFittedRange: for pixels drawn within the fitted band
// range, every score stays within ScoreBound, so Int16 storage never
// saturates there (known by construction: the bound is the triangle
// inequality applied to y_i = w_i . (x - mean) / s).
func TestScoreBoundHoldsForFittedRange(t *testing.T) {
	b := &Basis{
		Mode:         Covariance,
		Bands:        []Band{{Min: 0, Max: 10}, {Min: -5, Max: 5}},
		Mean:         []float64{2, 0},
		StdDev:       []float64{1, 1},
		Eigenvalues:  []float64{4, 1e-6},
		Eigenvectors: [][]float64{{0.6, 0.8}, {-0.8, 0.6}},
	}
	// Hand-worked: component 0: 0.6*8 + 0.8*5 = 8.8; component 1: 0.8*8 + 0.6*5 = 9.4.
	for i, want := range []float64{8.8, 9.4} {
		if got := b.ScoreBound(i); math.Abs(got-want) > 1e-12 {
			t.Errorf("bound %d = %v, want %v", i, got, want)
		}
	}
	// Component 1 has a tiny eigenvalue: 16 sigma would saturate at 0.016,
	// the bound widens the scale to 9.4/32767.
	scale, _ := b.Int16Scaling(1)
	if math.Abs(scale-9.4/32767) > 1e-15 {
		t.Errorf("scale %v", scale)
	}
	corner := []float64{10, -5} // a corner of the fitted range
	y := 0.0
	for j, w := range b.Eigenvectors[1] {
		y += w * (corner[j] - b.Mean[j])
	}
	if q := QuantizeInt16(y, scale, 0); math.Abs(float64(q)*scale-y) > scale/2 {
		t.Errorf("corner score %v stored as %d: off by more than half a step", y, q)
	}
}
