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
		{202.0922, 16 * 14.21591361819563 / 32767}, // Gao (2009) Table 6.5 λ₁; σ = √202.0922
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
