package change

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

func TestChiSquareQuantiles(t *testing.T) {
	// Source: NIST/SEMATECH e-Handbook of Statistical Methods, section
	// 1.3.6.7.4, "Critical Values of the Chi-Square Distribution" (upper
	// tail, probability 0.01 and 0.05 of exceeding): 6.635, 9.210, 11.345
	// for 1–3 degrees of freedom at 0.99 and 3.841 for 1 at 0.95. The table
	// prints three decimals; the five-decimal values checked here agree
	// with it and with closed forms: for ν = 1 the quantile is the square
	// of the normal quantile, 2.5758293² = 6.63490 and 1.9599640² = 3.84146;
	// for ν = 2 it is −2·ln(1 − q) = 2·ln 100 = 9.21034. For ν = 3, where
	// there is no closed form, the survival function of A&S 26.4.4 at
	// 11.34487 is checked to be 0.01 as well.
	for _, c := range []struct {
		q    float64
		k    int
		want float64
	}{
		{0.99, 1, 6.63490},
		{0.99, 2, 9.21034},
		{0.99, 3, 11.34487},
		{0.95, 1, 3.84146},
	} {
		got, err := Threshold{RuleChiSq, c.q}.Resolve(c.k, nil)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-c.want) > 1e-5 {
			t.Errorf("chisq:%v with k = %d: %.6f, want %.5f", c.q, c.k, got, c.want)
		}
	}
	// Closed forms as above, to full precision of the formulas.
	z := distuv.UnitNormal.Quantile(0.995)
	if got, _ := (Threshold{RuleChiSq, 0.99}).Resolve(1, nil); math.Abs(got-z*z) > 1e-9 {
		t.Errorf("k = 1: %v, want z² = %v", got, z*z)
	}
	if got, _ := (Threshold{RuleChiSq, 0.99}).Resolve(2, nil); math.Abs(got-2*math.Log(100)) > 1e-9 {
		t.Errorf("k = 2: %v, want 2 ln 100", got)
	}
	x := 11.34487 // Q(x | ν = 3) = erfc(sqrt(x/2)) + sqrt(2x/π)·exp(−x/2), A&S 26.4.4
	if q := math.Erfc(math.Sqrt(x/2)) + math.Sqrt(2*x/math.Pi)*math.Exp(-x/2); math.Abs(q-0.01) > 1e-7 {
		t.Errorf("A&S 26.4.4 at 11.34487 = %v, want 0.01", q)
	}
}

func TestResolve(t *testing.T) {
	zs := []float64{1, 4, 9, 16} // sqrt: 1, 2, 3, 4; mean 2.5, sd sqrt(5/3)
	got, err := Threshold{RuleSigma, 2}.Resolve(3, zs)
	if want := math.Pow(2.5+2*math.Sqrt(5.0/3), 2); err != nil || math.Abs(got-want) > 1e-12 {
		t.Errorf("sigma:2 = %v, %v, want %v", got, err, want)
	}
	if got, err := (Threshold{RuleValue, 25}).Resolve(3, nil); got != 25 || err != nil {
		t.Errorf("value:25 = %v, %v", got, err)
	}

	// Otsu on a mixture built to be bimodal: 20 000 no-change pixels with
	// Z ~ χ²₃ (log(1+Z) mostly in [0, 3]) and 2 000 changes with Z around
	// 10⁴ (log(1+Z) ≈ 9.2). The cut must fall in the gap: above the
	// 0.9999 quantile of χ²₃ (21.1) and below the smallest change.
	rng := rand.New(rand.NewPCG(21, 22))
	zs = zs[:0]
	for range 20_000 {
		a, b, c := rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()
		zs = append(zs, a*a+b*b+c*c)
	}
	lowest := math.Inf(1)
	for range 2_000 {
		z := 1e4 * math.Exp(0.2*rng.NormFloat64())
		lowest = min(lowest, z)
		zs = append(zs, z)
	}
	cut, err := Threshold{Rule: RuleOtsu}.Resolve(3, zs)
	if err != nil || !(cut > 21.1 && cut < lowest) {
		t.Errorf("otsu cut = %v, %v, want in (21.1, %v)", cut, err, lowest)
	}

	for _, c := range []struct {
		th   Threshold
		zs   []float64
		want error
		text string
	}{
		{Threshold{RuleSigma, 3}, []float64{1}, ErrNoScores, "at least 2"},
		{Threshold{Rule: RuleOtsu}, nil, ErrNoScores, "otsu"},
		{Threshold{RuleSigma, 3}, []float64{1, -1}, nil, "-1 at 1"},
		{Threshold{Rule: RuleOtsu}, []float64{1, math.NaN()}, nil, "NaN at 1"},
		{Threshold{Rule: RuleOtsu}, []float64{2, 2, 2}, nil, "all 3 Z values are equal"},
	} {
		_, err := c.th.Resolve(3, c.zs)
		if err == nil || (c.want != nil && !errors.Is(err, c.want)) || !strings.Contains(err.Error(), c.text) {
			t.Errorf("%v on %v: err = %v, want %v containing %q", c.th, c.zs, err, c.want, c.text)
		}
	}
}

func TestOtsu(t *testing.T) {
	// Worked example: A. Greensted, "Otsu Thresholding", The Lab Book Pages
	// (2010), a 6×6 image with 6 grey levels whose histogram is
	// 8, 7, 2, 6, 9, 4. The published result is threshold T = 3 (levels
	// 0–2 background, 3–5 foreground) with within-class variance 0.4909.
	// Otsu returns the last bin of the lower class, so 2.
	hist := []float64{8, 7, 2, 6, 9, 4}
	if got := Otsu(hist); got != 2 {
		t.Errorf("Otsu(%v) = %d, want 2 (T = 3 in the source)", hist, got)
	}
	// Within-class variance = total variance − between-class variance.
	var n, s, ss float64
	for i, h := range hist {
		n += h
		s += float64(i) * h
		ss += float64(i*i) * h
	}
	total := ss/n - (s/n)*(s/n)
	n0, m0 := 17.0, (0*8+1*7+2*2)/17.0
	n1, m1 := 19.0, (3*6+4*9+5*4)/19.0
	between := n0 * n1 * (m0 - m1) * (m0 - m1) / (n * n)
	if w := total - between; math.Abs(w-0.4909) > 5e-5 {
		t.Errorf("within-class variance at T = 3: %.5f, want 0.4909", w)
	}

	// Two equal spikes at bins 10 and 50: by symmetry every split in
	// 10..49 has the same between-class variance, and Otsu returns the
	// middle of that run, (10+49)/2 = 29.
	hist = make([]float64, 64)
	hist[10], hist[50] = 100, 100
	if got := Otsu(hist); got != 29 {
		t.Errorf("two spikes: Otsu = %d, want 29", got)
	}

	// Two Gaussian modes of equal weight and width, centred on bins 60
	// and 180, which overlap: by symmetry the optimal split is at the
	// midpoint, bin 119 or 120.
	hist = make([]float64, 256)
	for i := range hist {
		x := float64(i)
		hist[i] = math.Exp(-(x-60)*(x-60)/(2*25*25)) + math.Exp(-(x-180)*(x-180)/(2*25*25))
	}
	if got := Otsu(hist); got != 119 && got != 120 {
		t.Errorf("symmetric mixture: Otsu = %d, want 119 or 120", got)
	}

	// Degenerate histograms have no split.
	for _, h := range [][]float64{{0, 0, 0}, {0, 5, 0}} {
		if got := Otsu(h); got != -1 {
			t.Errorf("Otsu(%v) = %d, want -1", h, got)
		}
	}
}

func TestParseThreshold(t *testing.T) {
	for _, c := range []struct {
		in   string
		want Threshold
		err  string // substring of the error, "" for success
	}{
		{"chisq:0.999", Threshold{RuleChiSq, 0.999}, ""},
		{"chisq:.95", Threshold{RuleChiSq, 0.95}, ""},
		{"sigma:3", Threshold{RuleSigma, 3}, ""},
		{"sigma:2.5", Threshold{RuleSigma, 2.5}, ""},
		{"otsu", Threshold{Rule: RuleOtsu}, ""},
		{"value:25", Threshold{RuleValue, 25}, ""},
		{"value:0", Threshold{RuleValue, 0}, ""},
		{"value:1e3", Threshold{RuleValue, 1000}, ""},

		{"", Threshold{}, "empty threshold"},
		{"chi:0.9", Threshold{}, `"chi:0.9": unknown rule "chi"`},
		{"CHISQ:0.9", Threshold{}, `unknown rule "CHISQ"`},
		{"0.999", Threshold{}, `unknown rule "0.999"`},
		{"chisq", Threshold{}, `"chisq": missing number after "chisq:"`},
		{"sigma:", Threshold{}, `missing number after "sigma:"`},
		{"chisq:abc", Threshold{}, `"chisq:abc": bad number "abc"`},
		{"chisq: 0.9", Threshold{}, `bad number " 0.9"`},
		{"value:NaN", Threshold{}, `bad number "NaN"`},
		{"value:Inf", Threshold{}, `bad number "Inf"`},
		{"value:1e999", Threshold{}, `bad number "1e999"`},
		{"chisq:0.9:1", Threshold{}, `bad number "0.9:1"`},
		{"chisq:1", Threshold{}, `"chisq:1": quantile 1 not in (0, 1)`},
		{"chisq:0", Threshold{}, "quantile 0 not in (0, 1)"},
		{"chisq:-0.5", Threshold{}, "quantile -0.5 not in (0, 1)"},
		{"sigma:0", Threshold{}, `"sigma:0": sigma multiple 0 must be > 0`},
		{"sigma:-2", Threshold{}, "sigma multiple -2 must be > 0"},
		{"value:-1", Threshold{}, `"value:-1": Z value -1 must be >= 0`},
		{"otsu:3", Threshold{}, `"otsu:3": otsu takes no number`},
		{"otsu:", Threshold{}, "otsu takes no number"},
	} {
		got, err := ParseThreshold(c.in)
		if c.err == "" {
			if err != nil || got != c.want {
				t.Errorf("ParseThreshold(%q) = %+v, %v, want %+v", c.in, got, err, c.want)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), c.err) || !strings.HasPrefix(err.Error(), "threshold") && !strings.HasPrefix(err.Error(), "empty threshold") {
			t.Errorf("ParseThreshold(%q) error = %v, want one containing %q", c.in, err, c.err)
		}
	}
}

func TestThresholdStringTrim(t *testing.T) {
	for _, c := range []struct {
		th   Threshold
		s    string
		trim float64
	}{
		{Threshold{RuleChiSq, 0.999}, "chisq:0.999", 0.999},
		{Threshold{RuleChiSq, 0.99}, "chisq:0.99", 0.99},
		{Threshold{RuleSigma, 3}, "sigma:3", DefaultTrim},
		{Threshold{Rule: RuleOtsu}, "otsu", DefaultTrim},
		{Threshold{RuleValue, 12.5}, "value:12.5", DefaultTrim},
	} {
		if got := c.th.String(); got != c.s {
			t.Errorf("%+v.String() = %q, want %q", c.th, got, c.s)
		}
		if got := c.th.Trim(); got != c.trim {
			t.Errorf("%v.Trim() = %v, want %v", c.th, got, c.trim)
		}
	}
}

func FuzzParseThreshold(f *testing.F) {
	for _, s := range []string{"chisq:0.999", "sigma:3", "otsu", "value:25", "", "chisq:", "otsu:1", "value:-0", "sigma:1e-300", "chisq:0x1p-3",
		"value:1e999", "sigma:NaN", "sigma:+Inf", "chisq:1", "CHISQ:0.5", "chisq:.5", "value:1_000", "value:0x1.8p1", "otsu:", ":", "chisq:0.5:1", "value:4.9e-324"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		th, err := ParseThreshold(s)
		if err != nil {
			// Messages name what was parsed, and carry no package prefix:
			// callers add the flag's name.
			if strings.HasPrefix(err.Error(), "change: ") || strings.Contains(err.Error(), "\n") {
				t.Errorf("error %q has a package prefix or several lines", err)
			}
			return
		}
		// A parsed threshold is valid, resolves without panicking, and
		// its String parses back to the same threshold.
		if err := th.check(); err != nil {
			t.Fatalf("ParseThreshold(%q) = %+v, invalid: %v", s, th, err)
		}
		back, err := ParseThreshold(th.String())
		if err != nil || back != th {
			t.Fatalf("round trip of %q: %q gives %+v, %v", s, th.String(), back, err)
		}
		cut, err := th.Resolve(3, []float64{0, 1, 2, 30})
		if err != nil || math.IsNaN(cut) || cut < 0 {
			t.Fatalf("%v.Resolve = %v, %v", th, cut, err)
		}
	})
}
