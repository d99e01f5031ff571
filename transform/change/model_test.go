package change

import (
	"errors"
	"fmt"
	"gonum.org/v1/gonum/stat/distuv"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// gaussian returns n pixels drawn from N(loc, A·Aᵀ), pixel-major, with A
// lower triangular (row-major k×k).
func gaussian(rng *rand.Rand, n int, loc, a []float64) []float64 {
	k := len(loc)
	d := make([]float64, n*k)
	z := make([]float64, k)
	for p := range n {
		for j := range z {
			z[j] = rng.NormFloat64()
		}
		for i := range k {
			v := loc[i]
			for j := 0; j <= i; j++ {
				v += a[i*k+j] * z[j]
			}
			d[p*k+i] = v
		}
	}
	return d
}

// covOf returns A·Aᵀ for the lower triangular A.
func covOf(a []float64, k int) *mat.SymDense {
	var s mat.SymDense
	s.SymOuterK(1, mat.NewDense(k, k, a))
	return &s
}

// The test model: a non-centred location and a full, correlated covariance
// (correlations 0.62, -0.27 and 0.24, standard deviations 2, 1.28 and 0.66).
var (
	testLoc = []float64{2, -1, 0.5}
	testA   = []float64{
		2, 0, 0,
		0.8, 1, 0,
		-0.5, 0.3, 0.3,
	}
)

// contaminated returns nClean pixels of the test model followed by nOut far
// outliers: half a compact cluster (a coherent change, which also drags the
// starting median) and half scattered in random directions, all at
// Mahalanobis distance 15 or more (Z ≥ 225).
func contaminated(rng *rand.Rand, nClean, nOut int) []float64 {
	d := gaussian(rng, nClean, testLoc, testA)
	k := len(testLoc)
	w := make([]float64, k)
	for p := range nOut {
		var r float64
		if p%2 == 0 {
			// Cluster: whitened offset (20, -20, 10) plus unit noise.
			w[0], w[1], w[2] = 20+rng.NormFloat64(), -20+rng.NormFloat64(), 10+rng.NormFloat64()
		} else {
			for j := range w {
				w[j] = rng.NormFloat64()
				r += w[j] * w[j]
			}
			s := (15 + 25*rng.Float64()) / math.Sqrt(r)
			for j := range w {
				w[j] *= s
			}
		}
		for i := range k {
			v := testLoc[i]
			for j := 0; j <= i; j++ {
				v += testA[i*k+j] * w[j]
			}
			d = append(d, v)
		}
	}
	return d
}

func TestFitRecoversModel(t *testing.T) {
	// 95 000 clean pixels and 5 000 (5 %) outliers. With n = 95 000 the
	// standard error of a location component is sd/sqrt(n) = 0.0032·sd and
	// that of a covariance entry S_ij is sqrt((S_ii·S_jj + S_ij²)/n) ≤
	// 0.0046·sqrt(S_ii·S_jj); trimming at q = 0.999 costs little efficiency.
	// The tolerances, 0.02·sd and 0.03·sqrt(S_ii·S_jj), are 6 standard
	// errors or more.
	const nClean, nOut, k = 95_000, 5_000, 3
	rng := rand.New(rand.NewPCG(1, 2))
	d := contaminated(rng, nClean, nOut)
	m, err := Fit(d, k, DefaultTrim)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("iterations %d converged %v flagged %d", m.Iterations, m.Converged, m.Flagged)
	if !m.Converged || m.Iterations < 2 || m.Sample != nClean+nOut || m.Trim != DefaultTrim || m.K() != k {
		t.Errorf("model record: iterations %d converged %v sample %d trim %v k %d",
			m.Iterations, m.Converged, m.Sample, m.Trim, m.K())
	}
	want := covOf(testA, k)
	for i := range k {
		sd := math.Sqrt(want.At(i, i))
		if got := m.Location[i]; math.Abs(got-testLoc[i]) > 0.02*sd {
			t.Errorf("location[%d] = %.4f, want %.4f ± %.4f", i, got, testLoc[i], 0.02*sd)
		}
		for j := range k {
			tol := 0.03 * math.Sqrt(want.At(i, i)*want.At(j, j))
			if got := m.Covariance.At(i, j); math.Abs(got-want.At(i, j)) > tol {
				t.Errorf("covariance(%d,%d) = %.4f, want %.4f ± %.4f", i, j, got, want.At(i, j), tol)
			}
		}
	}

	// Flag rate of the clean pixels at chisq:0.999. If the model were exact
	// the count would be Binomial(95 000, 0.001): mean 95, standard error
	// sqrt(0.001·0.999/95000) = 1.03e-4 on the fraction. The estimation
	// error of S (≈0.5 % relative, see above) moves the rate by about
	// f_χ²₃(16.27)·16.27·0.005 ≈ 0.4e-4 more, so the tolerance is 4e-4,
	// about 3.6 combined standard errors.
	th, err := ParseThreshold(DefaultThreshold)
	if err != nil {
		t.Fatal(err)
	}
	cut, err := th.Resolve(k, nil)
	if err != nil {
		t.Fatal(err)
	}
	zs := m.Scores(nil, d)
	var cleanFlagged int
	for _, z := range zs[:nClean] {
		if z > cut {
			cleanFlagged++
		}
	}
	frac := float64(cleanFlagged) / nClean
	t.Logf("clean pixels flagged: %d (%.5f)", cleanFlagged, frac)
	if math.Abs(frac-0.001) > 4e-4 {
		t.Errorf("flagged fraction of clean pixels = %.5f, want 0.001 ± 0.0004", frac)
	}
	for p, z := range zs[nClean:] {
		if z <= cut {
			t.Errorf("outlier %d not flagged: Z = %.1f", p, z)
		}
	}
	if got, want := m.Flagged, cleanFlagged+nOut; got != want {
		t.Errorf("Flagged = %d, want %d (clean %d + outliers)", got, want, cleanFlagged)
	}
}

func TestFitCleanIdentity(t *testing.T) {
	// Without contamination and with identity covariance the consistency
	// factor alone keeps S unbiased: n = 50 000, trim 0.99 (the larger
	// factor, 1.07 for k = 2), diagonal within 0.03 (≈ 4.5 se of 0.0063).
	rng := rand.New(rand.NewPCG(3, 4))
	d := gaussian(rng, 50_000, []float64{0, 0}, []float64{1, 0, 0, 1})
	m, err := Fit(d, 2, 0.99)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 2 {
		if v := m.Covariance.At(i, i); math.Abs(v-1) > 0.03 {
			t.Errorf("variance %d = %.4f, want 1 ± 0.03", i, v)
		}
	}
	if c := m.Covariance.At(0, 1); math.Abs(c) > 0.03 {
		t.Errorf("covariance = %.4f, want 0 ± 0.03", c)
	}
}

func TestPValueWeightingShrinks(t *testing.T) {
	// Why Fit trims instead of weighting by p-values: on clean N(0, I₃)
	// data, weighting each pixel by P(χ²₃ > Z) shrinks the covariance to
	// about 0.58 of its value (0.5756 by numerical integration of
	// E[Q(Z)·Z]/(3·E[Q(Z)]) over the χ²₃ density), so Z of the weighted
	// model is inflated by ~1.7 and chisq:0.999 (Z > 16.27) flags pixels
	// with true Z > 9.37: 2.5 % of them instead of 0.1 %.
	rng := rand.New(rand.NewPCG(5, 6))
	const n, k = 20_000, 3
	d := gaussian(rng, n, make([]float64, k), []float64{1, 0, 0, 0, 1, 0, 0, 0, 1})
	var sw, swz float64
	for p := range n {
		var z float64
		for _, v := range d[p*k : (p+1)*k] {
			z += v * v
		}
		w := PValue(z, k)
		sw += w
		swz += w * z
	}
	shrink := swz / sw / k // weighted mean variance per component (1 if unbiased)
	t.Logf("p-value weighted variance / true variance = %.3f", shrink)
	if shrink > 0.8 {
		t.Errorf("weighted variance ratio %.3f, expected clearly below 1", shrink)
	}
}

func TestFitErrors(t *testing.T) {
	t.Run("too few", func(t *testing.T) {
		_, err := Fit([]float64{1, 2, 3, 4, 5, 6}, 3, 0.999) // 2 pixels, k = 3
		if !errors.Is(err, ErrTooFewPixels) {
			t.Errorf("err = %v, want ErrTooFewPixels", err)
		}
	})
	t.Run("constant component", func(t *testing.T) {
		rng := rand.New(rand.NewPCG(7, 8))
		d := make([]float64, 2*100)
		for p := range 100 {
			d[2*p] = rng.NormFloat64()
			d[2*p+1] = 4
		}
		_, err := Fit(d, 2, 0.999)
		if !errors.Is(err, ErrSingular) || !strings.Contains(err.Error(), "component 1") {
			t.Errorf("err = %v, want ErrSingular naming component 1", err)
		}
	})
	t.Run("collinear", func(t *testing.T) {
		rng := rand.New(rand.NewPCG(9, 10))
		d := make([]float64, 2*1000)
		for p := range 1000 {
			v := rng.NormFloat64()
			d[2*p], d[2*p+1] = v, 2*v
		}
		if _, err := Fit(d, 2, 0.999); !errors.Is(err, ErrSingular) {
			t.Errorf("err = %v, want ErrSingular", err)
		}
	})
	t.Run("NaN", func(t *testing.T) {
		d := []float64{1, 2, 3, math.NaN(), 5, 6}
		if _, err := Fit(d, 1, 0.999); err == nil || !strings.Contains(err.Error(), "pixel 3") {
			t.Errorf("err = %v, want error naming pixel 3", err)
		}
	})
	t.Run("MAD zero, spread", func(t *testing.T) {
		// 60 % of the values equal: MAD is 0 and the mean absolute
		// deviation takes over, so Fit still works.
		d := make([]float64, 1000)
		rng := rand.New(rand.NewPCG(11, 12))
		for p := 600; p < len(d); p++ {
			d[p] = rng.NormFloat64()
		}
		if _, err := Fit(d, 1, 0.999); err != nil {
			t.Errorf("err = %v", err)
		}
	})
}

func TestPanics(t *testing.T) {
	m, err := NewModel([]float64{0, 0}, mat.NewSymDense(2, []float64{1, 0, 0, 1}))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		f    func()
	}{
		{"Fit k 0", func() { Fit([]float64{1}, 0, 0.5) }},
		{"Fit length", func() { Fit([]float64{1, 2, 3}, 2, 0.5) }},
		{"Fit trim 1", func() { Fit([]float64{1, 2, 3}, 1, 1) }},
		{"Fit trim NaN", func() { Fit([]float64{1, 2, 3}, 1, math.NaN()) }},
		{"Z length", func() { m.Scorer().Z([]float64{1}) }},
		{"Centre dst", func() { m.Scorer().Centre(make([]float64, 3), []float64{1, 2}) }},
		{"Scores length", func() { m.Scores(nil, []float64{1, 2, 3}) }},
		{"zero Model", func() { (&Model{}).Scorer() }},
		{"NewModel dims", func() { NewModel([]float64{0}, mat.NewSymDense(2, nil)) }},
		{"PValue k 0", func() { PValue(1, 0) }},
		{"Resolve k 0", func() { Threshold{RuleValue, 1}.Resolve(0, nil) }},
		{"Resolve bad", func() { Threshold{"nope", 1}.Resolve(1, nil) }},
		{"Otsu short", func() { Otsu([]float64{1}) }},
		{"Otsu negative", func() { Otsu([]float64{1, -1}) }},
		{"Otsu NaN", func() { Otsu([]float64{1, math.NaN()}) }},
		{"Sampler n", func() { NewSampler(0, 1, 0) }},
		{"Sampler offer", func() { NewSampler(1, 2, 0).Offer(0, []float64{1}) }},
		{"Sampler merge", func() { NewSampler(1, 2, 0).Merge(NewSampler(1, 2, 1)) }},
		{"BandScorer map", func() { unit2().BandScorer([]float64{1, 2, 3}) }},
		{"BandScorer dx", func() { unit2().BandScorer([]float64{1, 0, 0, 1}).ZTop([]float64{1}) }},
	} {
		func() {
			defer func() {
				r := recover()
				if s, ok := r.(string); !ok || !strings.HasPrefix(s, "change: ") {
					t.Errorf("%s: recovered %v, want a panic with prefix \"change: \"", c.name, r)
				}
			}()
			c.f()
		}()
	}
}

func TestScorer(t *testing.T) {
	k := 3
	cov := covOf(testA, k)
	m, err := NewModel(testLoc, cov)
	if err != nil {
		t.Fatal(err)
	}
	var chol mat.Cholesky
	if !chol.Factorize(cov) {
		t.Fatal("test covariance not positive definite")
	}
	rng := rand.New(rand.NewPCG(13, 14))
	sc := m.Scorer()
	for range 100 {
		d := []float64{5 * rng.NormFloat64(), 5 * rng.NormFloat64(), 5 * rng.NormFloat64()}
		c := mat.NewVecDense(k, sc.Centre(nil, d))
		var x mat.VecDense
		if err := chol.SolveVecTo(&x, c); err != nil {
			t.Fatal(err)
		}
		want := mat.Dot(c, &x) // (d−m)ᵀ S⁻¹ (d−m) by gonum's solver
		z, top := sc.ZTop(d)
		if got := sc.Z(d); math.Abs(got-want) > 1e-12*want || got != z {
			t.Fatalf("Z = %v, ZTop = %v, want %v", got, z, want)
		}
		// top is the largest squared whitened coordinate, y = L⁻¹(d−m).
		var l mat.TriDense
		chol.LTo(&l)
		var y mat.VecDense
		if err := y.SolveVec(&l, c); err != nil {
			t.Fatal(err)
		}
		for i := range k {
			if y.AtVec(i)*y.AtVec(i) > y.AtVec(top)*y.AtVec(top) {
				t.Fatalf("top = %d but |y_%d| = %v > |y_top| = %v", top, i, y.AtVec(i), y.AtVec(top))
			}
		}
	}
	// The location scores 0, and a pure shift of component 2 in whitened
	// units tops component 2.
	if z := sc.Z(testLoc); z != 0 {
		t.Errorf("Z(location) = %v", z)
	}
	d := []float64{testLoc[0], testLoc[1], testLoc[2] + 10*testA[8]}
	if z, top := sc.ZTop(d); top != 2 || math.Abs(z-100) > 1e-9 {
		t.Errorf("ZTop = %v, %d, want 100, 2", z, top)
	}
	if allocs := testing.AllocsPerRun(100, func() { sc.Z(d) }); allocs != 0 {
		t.Errorf("Z allocates %v times", allocs)
	}
	// Location and Covariance are copies.
	m.Location[0] = 1e6
	m.Covariance.SetSym(0, 0, 1e6)
	if z := m.Scorer().Z(testLoc); z != 0 {
		t.Errorf("editing Location changed scoring: Z = %v", z)
	}
}

func TestScorerConcurrent(t *testing.T) {
	// One Scorer per goroutine on a shared Model (run with -race).
	m, err := NewModel(testLoc, covOf(testA, 3))
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(15, 16))
	d := gaussian(rng, 2000, testLoc, testA)
	want := m.Scores(nil, d)
	var wg sync.WaitGroup
	for w := range 4 {
		wg.Go(func() {
			sc := m.Scorer()
			for p := w; p < len(want); p += 4 {
				if z := sc.Z(d[3*p : 3*p+3]); z != want[p] {
					t.Errorf("pixel %d: Z = %v, want %v", p, z, want[p])
					return
				}
			}
		})
	}
	wg.Wait()
}

func TestNewModelErrors(t *testing.T) {
	if _, err := NewModel([]float64{0, 0}, mat.NewSymDense(2, []float64{1, 1, 1, 1})); !errors.Is(err, ErrSingular) {
		t.Errorf("singular: err = %v", err)
	}
	if _, err := NewModel([]float64{0, 0}, mat.NewSymDense(2, []float64{1, 0, 0, 1e-14})); !errors.Is(err, ErrSingular) {
		t.Errorf("ill-conditioned: err = %v", err)
	}
	if _, err := NewModel([]float64{0, math.Inf(1)}, mat.NewSymDense(2, []float64{1, 0, 0, 1})); err == nil {
		t.Error("infinite location accepted")
	}
	if _, err := NewModel([]float64{0, 0}, mat.NewSymDense(2, []float64{1, math.NaN(), math.NaN(), 1})); err == nil {
		t.Error("NaN covariance accepted")
	}
}

func TestPValue(t *testing.T) {
	for _, c := range []struct {
		z    float64
		k    int
		want float64
		src  string
	}{
		// k = 2: χ²₂ is exponential with mean 2, Q = exp(−z/2)
		// (Abramowitz & Stegun, Handbook of Mathematical Functions,
		// 26.4.5 with ν = 2). 1 − CDF is exactly 0 here.
		{1000, 2, math.Exp(-500), "A&S 26.4.5, ν = 2"},
		{4, 2, math.Exp(-2), "A&S 26.4.5, ν = 2"},
		// k = 1: Q = 2·(1 − Φ(sqrt z)) = erfc(sqrt(z/2)) (A&S 26.4.4, ν = 1).
		{9, 1, math.Erfc(3 / math.Sqrt2), "A&S 26.4.4, ν = 1"},
		// k = 3: Q = 2·(1 − Φ(χ)) + 2·φ(χ)·χ with χ = sqrt z, i.e.
		// erfc(sqrt(z/2)) + sqrt(2z/π)·exp(−z/2) (A&S 26.4.4, ν = 3);
		// z = 200 gives 4.2185e-43, where 1 − CDF is 0.
		{200, 3, math.Erfc(10) + math.Sqrt(400/math.Pi)*math.Exp(-100), "A&S 26.4.4, ν = 3"},
		{0, 3, 1, "Q(0) = 1"},
		{-1, 3, 1, "Q(z < 0) = 1"},
	} {
		got := PValue(c.z, c.k)
		if !(got > 0) || math.Abs(got-c.want) > 1e-10*c.want {
			t.Errorf("PValue(%v, %d) = %v, want %v (%s)", c.z, c.k, got, c.want, c.src)
		}
	}
}

func benchmarkZ(b *testing.B, k int) {
	a := make([]float64, k*k)
	for i := range k {
		for j := 0; j < i; j++ {
			a[i*k+j] = 0.3
		}
		a[i*k+i] = 1
	}
	loc := make([]float64, k)
	m, err := NewModel(loc, covOf(a, k))
	if err != nil {
		b.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(17, 18))
	const n = 1024
	d := gaussian(rng, n, loc, a)
	sc := m.Scorer()
	b.ReportAllocs()
	var sink float64
	i := 0
	for b.Loop() {
		sink += sc.Z(d[i*k : (i+1)*k])
		i = (i + 1) % n
	}
	_ = fmt.Sprint(sink)
}

func BenchmarkScorerZ(b *testing.B) {
	for _, k := range []int{3, 8} {
		b.Run(fmt.Sprintf("k=%d", k), func(b *testing.B) { benchmarkZ(b, k) })
	}
}

func BenchmarkFit(b *testing.B) {
	rng := rand.New(rand.NewPCG(19, 20))
	d := contaminated(rng, 190_000, 10_000)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Fit(d, 3, DefaultTrim); err != nil {
			b.Fatal(err)
		}
	}
}

// TestPValueClosedFormMatchesGonum: the closed-form sum agrees with gonum's
// regularized incomplete gamma (distuv.ChiSquared.Survival, a reference
// library) to 1e-12 relative over k = 1..100 and z from 0.01 to 1400.
func TestPValueClosedFormMatchesGonum(t *testing.T) {
	for k := 1; k <= 100; k++ {
		for _, z := range []float64{0.01, 0.5, 1, 3, 7.8, 16.27, 50, 120, 400, 1000, 1399} {
			got := PValue(z, k)
			want := distuv.ChiSquared{K: float64(k)}.Survival(z)
			if want == 0 && got == 0 {
				continue
			}
			if math.Abs(got-want) > 1e-12*want && math.Abs(got-want) > 1e-300 {
				t.Fatalf("PValue(%v, %d) = %v, gonum %v", z, k, got, want)
			}
		}
	}
}

// TestMedianOf: the selection median equals the middle of the sorted values
// (the mean of the two middle ones for an even count), known by the
// definition of the median, on values with and without ties.
func TestMedianOf(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, n := range []int{1, 2, 3, 4, 5, 10, 101, 1000, 1001} {
		for _, ties := range []bool{false, true} {
			x := make([]float64, n)
			for i := range x {
				x[i] = rng.NormFloat64()
				if ties {
					x[i] = math.Round(x[i])
				}
			}
			sorted := slices.Sorted(slices.Values(x))
			want := sorted[n/2]
			if n%2 == 0 {
				want = sorted[n/2-1] + (sorted[n/2]-sorted[n/2-1])/2
			}
			if got := medianOf(slices.Clone(x)); got != want {
				t.Errorf("n %d, ties %v: median %v, want %v", n, ties, got, want)
			}
		}
	}
}

// unit2 is the no-change model of two components with location 0 and
// covariance I.
func unit2() *Model {
	cov := mat.NewSymDense(2, []float64{1, 0, 0, 1})
	m, err := NewModel([]float64{0, 0}, cov)
	if err != nil {
		panic(err)
	}
	return m
}
