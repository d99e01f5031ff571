package scenario

import (
	"math"
	"slices"
	"testing"
)

func TestHyperspectralCleanWindows(t *testing.T) {
	// Known by construction: the noise-free render is a pure function of
	// the window, like the noisy one.
	c := newTestCatchment(t, 256, 224, 11)
	checkCut(t, "hyperspectral clean", HyperBands, c.HyperspectralClean)
}

func TestHyperspectralNoise(t *testing.T) {
	// Known by construction: the noisy cube is the clean one plus noise of
	// standard deviation sigma_b per band (own and shared parts with
	// variances 1 - rho and rho), then rounded (variance 1/12, included).
	// With n ≈ 5000 valid pixels the sample standard deviation is within
	// about 1/sqrt(2n) ≈ 1% of sigma; the tolerance is 5% relative.
	c := newTestCatchment(t, 240, 210, 9)
	w, h := c.HyperSize()
	noisy, clean := make([]float64, w*h*HyperBands), make([]float64, w*h*HyperBands)
	c.Hyperspectral(0, 0, w, h, noisy)
	c.HyperspectralClean(0, 0, w, h, clean)
	again := make([]float64, len(noisy))
	c2 := newTestCatchment(t, 240, 210, 9)
	c2.Hyperspectral(0, 0, w, h, again)
	if !slices.Equal(noisy, again) {
		t.Fatal("same seed, different cubes")
	}
	sigma := c.hyperNoiseSigma()
	for _, tc := range []struct {
		name string
		band int
		tol  float64
	}{
		{"visible clear band", 10, 0.05},
		{"faulty band at 771 nm", 21, 0.05},
		{"faulty band at 1229 nm", 47, 0.05},
		{"faulty band at 2182 nm", 101, 0.05},
		{"water-vapour band at 1394 nm", 56, 0.05},
		{"SWIR clear band", 90, 0.05},
	} {
		var ss float64
		var n int
		for i := 0; i < w*h; i++ {
			if clean[i*HyperBands] == HyperNoData {
				continue
			}
			d := noisy[i*HyperBands+tc.band] - clean[i*HyperBands+tc.band]
			ss += d * d
			n++
		}
		got, want := math.Sqrt(ss/float64(n)), math.Sqrt(sigma[tc.band]*sigma[tc.band]+1.0/12)
		if math.Abs(got-want) > tc.tol*want {
			t.Errorf("%s: noise sd %.2f, want %.2f (%d pixels)", tc.name, got, want, n)
		}
	}
	for _, b := range HyperNoisyBands {
		if r := sigma[b] / sigma[b-1]; r < 0.8*HyperNoisyFactor {
			t.Errorf("band %d: noise only %.1f times its neighbour's", b+1, r)
		}
	}
}
