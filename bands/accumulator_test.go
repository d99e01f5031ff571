package bands

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// feed adds the pixels of x to a in the parts given by splits (see
// randomSplits), with the co-moment kernel chosen by fused.
func feed(a *Accumulator, x []float64, valid []bool, splits []int, fused bool) {
	p := a.Bands()
	for i := 1; i < len(splits); i++ {
		lo, hi := splits[i-1], splits[i]
		var v []bool
		if valid != nil {
			v = valid[lo:hi]
		}
		a.add(x[lo*p:hi*p], v, fused)
	}
}

// accumulationCases are the data shapes and chunkings shared by several
// tests: p from 2 to 224, all in one call or in parts of random sizes, with
// or without a random validity mask. Some cases exceed one internal chunk
// (4096 pixels on the fused path, 1170 pixels of 224 bands on the Syrk path).
var accumulationCases = []accCase{
	{p: 2, n: 1000},
	{p: 2, n: 1000, maxPart: 37, valid: 0.7},
	{p: 7, n: 10000},
	{p: 7, n: 5000, maxPart: 300},
	{p: 7, n: 5000, maxPart: 300, valid: 0.5},
	{p: 30, n: 3000, maxPart: 500, valid: 0.9},
	{p: 224, n: 2500},
	{p: 224, n: 1500, maxPart: 400, valid: 0.8},
}

type accCase struct {
	p, n    int
	maxPart int     // 0: one call of AddPixels.
	valid   float64 // fraction of valid pixels; 0: no mask.
}

func (c accCase) String() string {
	return fmt.Sprintf("p=%d,n=%d,part=%d,valid=%g", c.p, c.n, c.maxPart, c.valid)
}

// TestAgainstGonum compares every statistic with gonum's in-memory routines on
// the valid pixels, for both co-moment kernels.
func TestAgainstGonum(t *testing.T) {
	for ci, c := range accumulationCases {
		rnd := rand.New(rand.NewPCG(uint64(ci), 1))
		x := correlatedPixels(rnd, c.n, c.p)
		var valid []bool
		if c.valid > 0 {
			valid = randomMask(rnd, c.n, c.valid)
		}
		splits := []int{0, c.n}
		if c.maxPart > 0 {
			splits = randomSplits(rnd, c.n, c.maxPart)
		}
		ref := referenceStats(x, valid, c.p)
		for _, k := range kernels {
			t.Run(c.String()+"/"+k.name, func(t *testing.T) {
				a := NewAccumulator(c.p)
				feed(a, x, valid, splits, k.fused)
				// Known by construction: the number of valid pixels.
				if got := a.Count(); got != float64(ref.validCount) {
					t.Errorf("Count() = %v, want %d", got, ref.validCount)
				}
				// gonum stat.MeanStdDev (reference library).
				checkRel(t, "mean", relDiff(a.Mean(nil), ref.mean), tolExact)
				checkRel(t, "sd", relDiff(a.StdDev(nil), ref.sd), tolExact)
				// gonum stat.CovarianceMatrix (reference library).
				checkRel(t, "covariance", relDiffSym(a.Covariance(nil), ref.cov), tolExact)
				// gonum stat.CovarianceMatrix times n−1 (reference library).
				var wantM mat.SymDense
				wantM.ScaleSym(float64(ref.validCount-1), ref.cov)
				checkRel(t, "co-moment", relDiffSym(a.CoMoment(nil), &wantM), tolExact)
				// gonum stat.CorrelationMatrix (reference library).
				corr, err := a.Correlation(nil)
				if err != nil {
					t.Fatalf("Correlation: %v", err)
				}
				checkRel(t, "correlation", relDiffSym(corr, ref.corr), tolExact)
				// Known by construction: direct scan of the valid pixels;
				// extremes are exact.
				if got := a.Min(nil); relDiff(got, ref.min) != 0 {
					t.Errorf("Min() = %v, want %v", got, ref.min)
				}
				if got := a.Max(nil); relDiff(got, ref.max) != 0 {
					t.Errorf("Max() = %v, want %v", got, ref.max)
				}
			})
		}
	}
}

// TestShiftStability checks that adding 1e6 to every value leaves the
// covariance unchanged, as it must mathematically.
func TestShiftStability(t *testing.T) {
	const shift = 1e6
	for _, c := range []struct{ p, n int }{{2, 5000}, {7, 9000}, {30, 3000}, {224, 1500}} {
		rnd := rand.New(rand.NewPCG(uint64(c.p), 2))
		x := make([]float64, c.n*c.p)
		for i := range x {
			x[i] = rnd.Float64()
		}
		shifted := make([]float64, len(x))
		for i, v := range x {
			shifted[i] = v + shift
		}
		splits := randomSplits(rnd, c.n, 1000)
		for _, k := range kernels {
			t.Run(fmt.Sprintf("p=%d/%s", c.p, k.name), func(t *testing.T) {
				a, b := NewAccumulator(c.p), NewAccumulator(c.p)
				feed(a, x, nil, splits, k.fused)
				feed(b, shifted, nil, splits, k.fused)
				// Known by construction: covariance is shift-invariant, so
				// the expected value is that of the unshifted data.
				checkRel(t, "covariance", relDiffSym(b.Covariance(nil), a.Covariance(nil)), tolShift)
				// Known by construction: the mean moves by the shift.
				want := a.Mean(nil)
				for i := range want {
					want[i] += shift
				}
				checkRel(t, "mean", relDiff(b.Mean(nil), want), tolExact)
			})
		}
	}
}

// TestMerge checks that accumulating random parts separately and merging them
// in order gives the same statistics as one accumulation.
func TestMerge(t *testing.T) {
	for ci, c := range accumulationCases {
		t.Run(c.String(), func(t *testing.T) {
			rnd := rand.New(rand.NewPCG(uint64(ci), 3))
			x := correlatedPixels(rnd, c.n, c.p)
			var valid []bool
			if c.valid > 0 {
				valid = randomMask(rnd, c.n, c.valid)
			}
			whole := NewAccumulator(c.p)
			whole.AddPixels(x, valid)

			splits := randomSplits(rnd, c.n, c.n/3)
			merged := NewAccumulator(c.p)
			part := NewAccumulator(c.p)
			for i := 1; i < len(splits); i++ {
				lo, hi := splits[i-1], splits[i]
				part.Reset()
				var v []bool
				if valid != nil {
					v = valid[lo:hi]
				}
				part.AddPixels(x[lo*c.p:hi*c.p], v)
				merged.Merge(part)
			}
			// Known by construction: the same pixels accumulated in one
			// accumulator (itself checked against gonum in TestAgainstGonum).
			if merged.Count() != whole.Count() {
				t.Errorf("Count() = %v, want %v", merged.Count(), whole.Count())
			}
			checkRel(t, "mean", relDiff(merged.Mean(nil), whole.Mean(nil)), tolExact)
			checkRel(t, "co-moment", relDiffSym(merged.CoMoment(nil), whole.CoMoment(nil)), tolExact)
			if relDiff(merged.Min(nil), whole.Min(nil)) != 0 || relDiff(merged.Max(nil), whole.Max(nil)) != 0 {
				t.Errorf("extremes differ: min %v max %v, want %v %v",
					merged.Min(nil), merged.Max(nil), whole.Min(nil), whole.Max(nil))
			}
		})
	}
}

// TestMergeEmpty checks that an empty accumulator is a no-op on either side
// of Merge, bitwise.
func TestMergeEmpty(t *testing.T) {
	for _, p := range []int{1, 7, 40} {
		t.Run(fmt.Sprint("p=", p), func(t *testing.T) {
			a := NewAccumulator(p)
			a.AddPixels(correlatedPixels(rand.New(rand.NewPCG(4, uint64(p))), 100, p), nil)
			want := a.State()

			a.Merge(NewAccumulator(p))
			// Known by construction: merging nothing changes nothing.
			if !stateBitsEqual(a.State(), want) {
				t.Error("merging an empty accumulator changed the state")
			}
			e := NewAccumulator(p)
			e.Merge(a)
			// Known by construction: merging into nothing copies.
			if !stateBitsEqual(e.State(), want) {
				t.Error("merging into an empty accumulator did not copy the state")
			}
			e.Reset()
			e.Merge(NewAccumulator(p))
			// Known by construction: Reset gives an empty accumulator.
			if !stateBitsEqual(e.State(), NewAccumulator(p).State()) {
				t.Error("merging two empty accumulators is not empty")
			}
		})
	}
}

// TestMergeSelf checks that merging an accumulator with itself doubles the
// count and co-moment and keeps the mean: the data seen twice.
func TestMergeSelf(t *testing.T) {
	a := NewAccumulator(5)
	a.AddPixels(correlatedPixels(rand.New(rand.NewPCG(5, 5)), 200, 5), nil)
	want := a.State()
	a.Merge(a)
	got := a.State()
	// Known by construction: every pixel counted twice.
	if got.Count != 2*want.Count {
		t.Errorf("Count = %v, want %v", got.Count, 2*want.Count)
	}
	checkRel(t, "mean", relDiff(got.Mean, want.Mean), tolExact)
	for i := range got.CoMoment {
		for j := range got.CoMoment[i] {
			want.CoMoment[i][j] *= 2
		}
		checkRel(t, fmt.Sprint("co-moment row ", i), relDiff(got.CoMoment[i], want.CoMoment[i]), tolExact)
	}
}

// TestDeterministic checks that the same sequence of calls gives bitwise the
// same state, including through a State round trip midway.
func TestDeterministic(t *testing.T) {
	for _, p := range []int{3, 50} {
		for _, k := range kernels {
			t.Run(fmt.Sprintf("p=%d/%s", p, k.name), func(t *testing.T) {
				rnd := rand.New(rand.NewPCG(6, uint64(p)))
				x := correlatedPixels(rnd, 3000, p)
				valid := randomMask(rnd, 3000, 0.6)
				splits := randomSplits(rnd, 3000, 700)
				run := func(roundTrip bool) State {
					a := NewAccumulator(p)
					mid := len(splits) / 2
					feed(a, x, valid, splits[:mid+1], k.fused)
					if roundTrip {
						var err error
						if a, err = FromState(a.State()); err != nil {
							t.Fatal(err)
						}
					}
					feed(a, x, valid, splits[mid:], k.fused)
					return a.State()
				}
				first := run(false)
				// Known by construction: a repeat of the same calls.
				if !stateBitsEqual(run(false), first) {
					t.Error("repeated run differs")
				}
				if !stateBitsEqual(run(true), first) {
					t.Error("run through FromState differs")
				}
			})
		}
	}
}

// TestZeroVariance checks that a constant band gives an exactly zero
// variance and a ZeroVarianceError naming it.
func TestZeroVariance(t *testing.T) {
	for _, c := range []struct {
		p, band int
		value   float64
	}{
		{p: 1, band: 0, value: 0.1},
		{p: 3, band: 0, value: 1e6 + 0.3},
		{p: 3, band: 2, value: -7.7},
		{p: 40, band: 17, value: 0.1},
	} {
		for _, k := range kernels {
			t.Run(fmt.Sprintf("p=%d,band=%d/%s", c.p, c.band, k.name), func(t *testing.T) {
				rnd := rand.New(rand.NewPCG(7, uint64(c.p)))
				const n = 9000
				x := correlatedPixels(rnd, n, c.p)
				for i := range n {
					x[i*c.p+c.band] = c.value
				}
				a := NewAccumulator(c.p)
				feed(a, x, randomMask(rnd, n, 0.9), randomSplits(rnd, n, 5000), k.fused)
				// Known by construction: the band is constant.
				if got := a.StdDev(nil)[c.band]; got != 0 {
					t.Errorf("StdDev of the constant band = %g, want exactly 0", got)
				}
				if got := a.Mean(nil)[c.band]; got != c.value {
					t.Errorf("Mean of the constant band = %v, want exactly %v", got, c.value)
				}
				_, err := a.Correlation(nil)
				if !errors.Is(err, ErrZeroVariance) {
					t.Fatalf("Correlation error %v does not match ErrZeroVariance", err)
				}
				var zv *ZeroVarianceError
				if !errors.As(err, &zv) || zv.Band != c.band {
					t.Errorf("Correlation error %#v, want band %d", err, c.band)
				}
			})
		}
	}
}

// TestEmpty checks the statistics of an accumulator that has seen no valid
// pixel, and of one that has seen a single pixel.
func TestEmpty(t *testing.T) {
	const p = 3
	a := NewAccumulator(p)
	a.AddPixels([]float64{1, 2, 3, 4, 5, 6}, []bool{false, false})
	a.AddPixels(nil, nil)
	// Known by construction: statistics of no data are undefined (NaN).
	if a.Count() != 0 {
		t.Errorf("Count() = %v, want 0", a.Count())
	}
	for name, v := range map[string][]float64{"Mean": a.Mean(nil), "Min": a.Min(nil), "Max": a.Max(nil), "StdDev": a.StdDev(nil)} {
		for _, x := range v {
			if !math.IsNaN(x) {
				t.Errorf("%s() = %v, want NaN", name, v)
				break
			}
		}
	}
	if c := a.Covariance(nil); !math.IsNaN(c.At(0, 1)) {
		t.Errorf("Covariance() = %v, want NaN", c)
	}
	var zv *ZeroVarianceError
	if _, err := a.Correlation(nil); !errors.As(err, &zv) || zv.Band != 0 {
		t.Errorf("Correlation() error = %v, want zero variance in band 0", err)
	}

	a.AddPixels([]float64{1, 2, 3}, nil)
	// Known by construction: one pixel has itself as mean and extremes and
	// an undefined sample variance.
	if got := a.Mean(nil); relDiff(got, []float64{1, 2, 3}) != 0 {
		t.Errorf("Mean() = %v, want [1 2 3]", got)
	}
	if got := a.StdDev(nil); !math.IsNaN(got[0]) {
		t.Errorf("StdDev() = %v, want NaN", got)
	}
}

// TestDestinations checks that results are written into dst when given.
func TestDestinations(t *testing.T) {
	a := NewAccumulator(2)
	a.AddPixels([]float64{1, 2, 3, 5, 5, 9}, nil)
	mean := make([]float64, 2)
	if got := a.Mean(mean); &got[0] != &mean[0] {
		t.Error("Mean did not return dst")
	}
	// Known by construction: the means of {1, 3, 5} and {2, 5, 9}.
	if relDiff(mean, []float64{3, 16.0 / 3}) > tolExact {
		t.Errorf("Mean = %v, want [3 5.333…]", mean)
	}
	var empty mat.SymDense
	if got := a.Covariance(&empty); got != &empty || empty.SymmetricDim() != 2 {
		t.Error("Covariance did not fill an empty dst")
	}
	// Known by construction: var{1,3,5} = 4, var{2,5,9} = 37/3,
	// cov = ((−2)(−10/3) + 0 + 2(11/3))/2 = 7.
	want := mat.NewSymDense(2, []float64{4, 7, 7, 37.0 / 3})
	checkRel(t, "covariance", relDiffSym(&empty, want), tolExact)
	dst := mat.NewSymDense(2, nil)
	if got, err := a.Correlation(dst); err != nil || got != dst {
		t.Errorf("Correlation(dst) = %p, %v; want dst, nil", got, err)
	}
}

// TestPanics checks that programmer errors panic with the package prefix.
func TestPanics(t *testing.T) {
	a := NewAccumulator(3)
	for _, c := range []struct {
		name string
		f    func()
	}{
		{"zero bands", func() { NewAccumulator(0) }},
		{"ragged pixels", func() { a.AddPixels(make([]float64, 7), nil) }},
		{"short mask", func() { a.AddPixels(make([]float64, 6), []bool{true}) }},
		{"merge mismatch", func() { a.Merge(NewAccumulator(4)) }},
		{"short dst", func() { a.Mean(make([]float64, 2)) }},
		{"wrong dst matrix", func() { a.CoMoment(mat.NewSymDense(2, nil)) }},
	} {
		t.Run(c.name, func(t *testing.T) {
			defer func() {
				r := recover()
				if s, ok := r.(string); !ok || !strings.HasPrefix(s, "bands: ") {
					t.Errorf("panic %v, want a string starting with %q", r, "bands: ")
				}
			}()
			c.f()
		})
	}
}

// TestNoAllocation checks that AddPixels does not allocate in steady state.
func TestNoAllocation(t *testing.T) {
	for _, p := range []int{7, 224} {
		rnd := rand.New(rand.NewPCG(8, uint64(p)))
		x := correlatedPixels(rnd, 3000, p)
		valid := randomMask(rnd, 3000, 0.5)
		a := NewAccumulator(p)
		a.AddPixels(x, valid)
		// Known by construction: scratch is reused after the first call.
		if n := testing.AllocsPerRun(5, func() { a.AddPixels(x, valid) }); n != 0 {
			t.Errorf("p=%d: AddPixels allocates %v times per call", p, n)
		}
	}
}

// TestOutlierFirst checks the co-moments when the first valid pixel of a
// chunk lies far from the rest: the BLAS path shifts each chunk by its first
// pixel, whose correction then cancels most of the product's bits, and must
// centre the chunk again. Reference: gonum's in-memory covariance, as in
// TestAgainstGonum.
func TestOutlierFirst(t *testing.T) {
	for _, p := range []int{3, 30, 224} {
		rnd := rand.New(rand.NewPCG(uint64(p), 3))
		n := 3000
		x := correlatedPixels(rnd, n, p)
		for j := range p {
			x[j] += 1e5 * float64(j+1) // pixel 0, and so the first pixel of the first chunk
		}
		ref := referenceStats(x, nil, p)
		for _, k := range kernels {
			t.Run(fmt.Sprintf("p=%d/%s", p, k.name), func(t *testing.T) {
				a := NewAccumulator(p)
				a.add(x, nil, k.fused)
				checkRel(t, "covariance", relDiffSym(a.Covariance(nil), ref.cov), tolExact)
				checkRel(t, "mean", relDiff(a.Mean(nil), ref.mean), tolExact)
			})
		}
	}
}
