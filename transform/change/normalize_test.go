package change

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestOrthogonal checks the orthogonal regression against the closed form of
// the total least squares slope for two variables (W. A. Fuller, "Measurement
// Error Models", 1987, eq. 1.3.7 with δ = 1), worked by hand on small data.
func TestOrthogonal(t *testing.T) {
	tests := []struct {
		name                string
		x, y                []float64
		slope, offset, corr float64 // by hand, from the formula in Orthogonal's doc
		tol                 float64 // relative; float64 rounding of a few sums
	}{
		// Exactly on y = 3 + 2x: every method gives slope 2, offset 3,
		// correlation 1 (known by construction).
		{"exact line", []float64{0, 1, 2, 3}, []float64{3, 5, 7, 9}, 2, 3, 1, 1e-14},
		// x = (0, 0, 1, 1), y = (0, 1, 0, 2): x̄ = 0.5, ȳ = 0.75,
		// s_xx = 1/3, s_yy = 2.75/3, s_xy = 0.5/3; slope = (2.75 − 1 +
		// sqrt(1.75² + 4·0.25)) / (2·0.5) = 1.75 + sqrt(4.0625) =
		// 3.765564437..., offset = 0.75 − 0.5·slope, corr = 0.5 /
		// sqrt(2.75) = 0.30151134...
		{"scatter", []float64{0, 0, 1, 1}, []float64{0, 1, 0, 2}, 1.75 + math.Sqrt(4.0625), 0.75 - 0.5*(1.75+math.Sqrt(4.0625)), 0.5 / math.Sqrt(2.75), 1e-14},
	}
	for _, tc := range tests {
		f, err := Orthogonal(tc.x, tc.y)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		for _, c := range []struct {
			what      string
			got, want float64
		}{{"slope", f.Gain, tc.slope}, {"offset", f.Offset, tc.offset}, {"correlation", f.Correlation, tc.corr}} {
			if math.Abs(c.got-c.want) > tc.tol*math.Max(1, math.Abs(c.want)) {
				t.Errorf("%s: %s = %.15g, want %.15g", tc.name, c.what, c.got, c.want)
			}
		}
	}
	if _, err := Orthogonal([]float64{1, 2, 3}, []float64{5, 5, 5}); err == nil {
		t.Error("constant y: no error")
	}
}

// TestOrthogonalUnbiased: with errors of equal variance on both variables
// the TLS slope is consistent while ordinary least squares is attenuated by
// the reliability ratio s_xx / (s_xx + σ²) (Fuller 1987, section 1.1).
func TestOrthogonalUnbiased(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	n := 200_000
	x, y := make([]float64, n), make([]float64, n)
	for i := range n {
		u := rng.NormFloat64() // true value, variance 1
		x[i] = u + 0.5*rng.NormFloat64()
		y[i] = 10 + 1.5*u + 0.5*rng.NormFloat64()
	}
	f, err := Orthogonal(x, y)
	if err != nil {
		t.Fatal(err)
	}
	// Standard error of the slope ~ 1/sqrt(n) ≈ 0.002; 1% is five of them.
	if math.Abs(f.Gain-1.5) > 0.015 || math.Abs(f.Offset-10) > 0.02 {
		t.Errorf("gain %v offset %v, want 1.5 and 10 (known by construction)", f.Gain, f.Offset)
	}
}

func TestNormalize(t *testing.T) {
	// before = 2 + 0.5·after in band 1 and 100 − 0.25·after... kept
	// positive: 7 + 0.25·after in band 2, exactly, on the stable pixels;
	// the unstable ones are far off the line and must be ignored (known by
	// construction).
	p, n := 2, 100
	before, after, stable := make([]float64, n*p), make([]float64, n*p), make([]bool, n)
	for i := range n {
		a1, a2 := float64(i), float64(i*i%37)
		after[i*p], after[i*p+1] = a1, a2
		before[i*p], before[i*p+1] = 2+0.5*a1, 7+0.25*a2
		stable[i] = i%3 != 0
		if !stable[i] {
			before[i*p], before[i*p+1] = 1000, -1000
		}
	}
	fits, err := Normalize(before, after, p, stable)
	if err != nil {
		t.Fatal(err)
	}
	for j, want := range []BandFit{{0.5, 2, 1}, {0.25, 7, 1}} {
		g := fits[j]
		if math.Abs(g.Gain-want.Gain) > 1e-12 || math.Abs(g.Offset-want.Offset) > 1e-10 || math.Abs(g.Correlation-1) > 1e-12 {
			t.Errorf("band %d: %+v, want %+v", j+1, g, want)
		}
	}
	if _, err := Normalize(before[:20], after[:20], p, stable[:10]); !errors.Is(err, ErrTooFewStable) {
		t.Errorf("10 pixels: %v, want ErrTooFewStable", err)
	}
}

func TestStableAndRobustScale(t *testing.T) {
	// The chi-square median with 3 degrees of freedom is 2.365974 (gonum's
	// distuv.ChiSquared.Quantile(0.5); standard tables give 2.366).
	med := distuv.ChiSquared{K: 3}.Quantile(0.5)
	flags, n := Stable(nil, []float64{0, med, med * 1.0001, 10}, 3)
	if n != 2 || !flags[0] || !flags[1] || flags[2] || flags[3] {
		t.Errorf("stable %v (%d), want the first two", flags, n)
	}
	// Median 3 and MAD 1 of (1, 2, 3, 4, 100) by hand: deviations 2, 1, 0,
	// 1, 97 have median 1.
	loc, scale := RobustScale([]float64{1, 2, 3, 4, 100}, 1)
	if loc[0] != 3 || math.Abs(scale[0]-madScale) > 1e-15 {
		t.Errorf("loc %v scale %v, want 3 and 1.4826", loc, scale)
	}
}

// TestOtsuSeparability: η of two separated spikes is 1 and of a uniform
// histogram of N bins is (3N²/4)/(N² − 1) (by hand: the within-class
// variance of each half is ((N/2)² − 1)/12 against (N² − 1)/12 in total);
// a Gaussian split at its mean gives about 2/π (the between-class variance
// of halves of N(0, 1) is (2·φ(0))² = 2/π).
func TestOtsuSeparability(t *testing.T) {
	two := make([]float64, 256)
	two[10], two[200] = 500, 300
	if eta := Eta(two, Otsu(two)); math.Abs(eta-1) > 1e-12 {
		t.Errorf("bimodal η = %v, want 1", eta)
	}
	flat := make([]float64, 256)
	for i := range flat {
		flat[i] = 1
	}
	want := 0.75 * 256 * 256 / (256*256 - 1)
	if eta := Eta(flat, Otsu(flat)); math.Abs(eta-want) > 1e-3 {
		t.Errorf("uniform η = %v, want %v", eta, want)
	}
	gauss := make([]float64, 256)
	for i := range gauss {
		x := (float64(i) - 127.5) / 25
		gauss[i] = math.Exp(-x * x / 2)
	}
	// 2% covers binning and the tails cut at ±5σ.
	if eta := Eta(gauss, Otsu(gauss)); math.Abs(eta-2/math.Pi) > 0.02*2/math.Pi || eta >= OtsuBound {
		t.Errorf("Gaussian η = %v, want about 2/π = %v and below %v", eta, 2/math.Pi, OtsuBound)
	}
	// On Z values: a chi-square no-change sample alone is unimodal in
	// log(1+Z); adding a far change cluster makes it bimodal.
	rng := rand.New(rand.NewPCG(1, 2))
	chi := distuv.ChiSquared{K: 3, Src: rng}
	zs := make([]float64, 20000)
	for i := range zs {
		zs[i] = chi.Rand()
	}
	uni, err := OtsuSeparability(zs)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 4000 {
		zs[i] = 1e6 * (1 + 0.1*rng.Float64())
	}
	bi, err := OtsuSeparability(zs)
	if err != nil {
		t.Fatal(err)
	}
	if uni >= OtsuBound || bi < 0.9 {
		t.Errorf("η unimodal %v (want < %v), bimodal %v (want >= 0.9)", uni, OtsuBound, bi)
	}
}
