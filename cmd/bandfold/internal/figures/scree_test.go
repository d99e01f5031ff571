package figures

import (
	"bytes"
	"image/png"
	"math"
	"strings"
	"testing"
)

const tol = 1e-12

func near(a, b float64) bool { return math.Abs(a-b) <= tol }

func TestScreeSeriesShares(t *testing.T) {
	// Deliberately not sorted: the given order must be kept.
	v, err := screeSeries(ScreeData{Eigenvalues: []float64{2, 5, 1, 2}, Chosen: 2})
	if err != nil {
		t.Fatal(err)
	}
	wantShares := []float64{0.2, 0.5, 0.1, 0.2}
	wantCum := []float64{0.2, 0.7, 0.8, 1.0}
	var sum float64
	for i := range wantShares {
		sum += v.shares[i]
		if !near(v.shares[i], wantShares[i]) || !near(v.cumulative[i], wantCum[i]) {
			t.Errorf("component %d: share %v cumulative %v, want %v %v",
				i+1, v.shares[i], v.cumulative[i], wantShares[i], wantCum[i])
		}
	}
	if !near(sum, 1) {
		t.Errorf("shares sum to %v", sum)
	}
	for i, want := range []float64{25.0 / 48, 13.0 / 48, 7.0 / 48, 3.0 / 48} {
		if !near(v.stick[i], want) {
			t.Errorf("stick %d = %v, want %v", i+1, v.stick[i], want)
		}
	}
	if v.shown != 4 || v.markerX != 2 {
		t.Errorf("shown %d marker %v, want 4 and 2", v.shown, v.markerX)
	}
	if strings.Contains(v.title, "first") {
		t.Errorf("title %q claims truncation", v.title)
	}
}

func TestScreeSeriesManyComponents(t *testing.T) {
	ev := make([]float64, 120)
	for i := range ev {
		ev[i] = math.Exp(-float64(i) / 8)
	}
	v, err := screeSeries(ScreeData{Title: "Scene", Eigenvalues: ev, Chosen: 7})
	if err != nil {
		t.Fatal(err)
	}
	if v.shown != 30 || len(v.shares) != 120 {
		t.Fatalf("shown %d of %d, want 30 of 120", v.shown, len(v.shares))
	}
	if want := "Scene\n(first 30 of 120 components)"; v.title != want {
		t.Errorf("title %q, want %q", v.title, want)
	}
	for i := 1; i < len(v.cumulative); i++ {
		if v.cumulative[i] < v.cumulative[i-1] {
			t.Fatalf("cumulative falls at %d", i+1)
		}
	}
	if !near(v.cumulative[119], 1) {
		t.Errorf("cumulative ends at %v", v.cumulative[119])
	}
	// A chosen k past the cap stays visible.
	v, err = screeSeries(ScreeData{Eigenvalues: ev, Chosen: 40, MaxShown: 10})
	if err != nil {
		t.Fatal(err)
	}
	if v.shown != 40 || v.markerX != 40 {
		t.Errorf("shown %d marker %v, want 40 and 40", v.shown, v.markerX)
	}
}

func TestScreeSeriesErrors(t *testing.T) {
	for name, s := range map[string]ScreeData{
		"empty":     {},
		"zero sum":  {Eigenvalues: []float64{0, 0}},
		"nan":       {Eigenvalues: []float64{1, math.NaN()}},
		"chosen>p":  {Eigenvalues: []float64{1, 2}, Chosen: 3},
		"chosen<0":  {Eigenvalues: []float64{1, 2}, Chosen: -1},
		"all below": {Eigenvalues: []float64{-1, -2}},
	} {
		if _, err := screeSeries(s); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
}

func TestScreePNG(t *testing.T) {
	ev := make([]float64, 224)
	for i := range ev {
		ev[i] = 1 / float64(1+i*i)
	}
	var buf bytes.Buffer
	if err := Scree(&buf, ScreeData{Eigenvalues: ev, Chosen: 6}); err != nil {
		t.Fatal(err)
	}
	cfg, err := png.DecodeConfig(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if cfg.Width != screeWidth || cfg.Height != screeHeight || cfg.Width < 800 {
		t.Errorf("size %dx%d", cfg.Width, cfg.Height)
	}
}
