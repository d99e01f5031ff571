package bands

import (
	"encoding/json"
	"errors"
	"math"
	"math/big"
	"math/rand/v2"
	"reflect"
	"testing"
)

// integerPixels returns n pixels of p bands with integer values spread over
// ±MaxExact (the extremes included), each band on its own offset so that
// a raw sum of squares is far larger than the co-moment.
func integerPixels(rnd *rand.Rand, n, p int) []float64 {
	x := make([]float64, n*p)
	for i := range n {
		for j := range p {
			v := float64(j*20000-50000) + math.Round(2000*rnd.NormFloat64())
			x[i*p+j] = min(max(v, -MaxExact), MaxExact)
		}
	}
	x[0], x[p+1] = -MaxExact, MaxExact
	return x
}

// bigStats computes the mean and the co-moment of the valid pixels of x in
// exact rational arithmetic with Go's math/big (a general-purpose reference
// library), each rounded once to the nearest float64.
func bigStats(x []float64, valid []bool, p int) (mean, com []float64) {
	n := new(big.Rat)
	sums := make([]big.Rat, p)
	prods := make([]big.Rat, p*p)
	var t, u big.Rat
	for i := range len(x) / p {
		if valid != nil && !valid[i] {
			continue
		}
		n.Add(n, big.NewRat(1, 1))
		for j := range p {
			sums[j].Add(&sums[j], t.SetFloat64(x[i*p+j]))
			for l := j; l < p; l++ {
				t.SetFloat64(x[i*p+j])
				prods[j*p+l].Add(&prods[j*p+l], t.Mul(&t, u.SetFloat64(x[i*p+l])))
			}
		}
	}
	mean, com = make([]float64, p), make([]float64, p*p)
	for j := range p {
		mean[j], _ = t.Quo(&sums[j], n).Float64()
		for l := j; l < p; l++ {
			// M = P − s·sᵀ/n
			t.Mul(&sums[j], &sums[l])
			t.Quo(&t, n)
			com[j*p+l], _ = u.Sub(&prods[j*p+l], &t).Float64()
		}
	}
	return mean, com
}

// TestExactAgainstBig: an exact accumulator's mean and co-moment are the
// exact values correctly rounded (math/big), bit for bit, for any cut of
// the pixels into blocks and parts and any merge order, through JSON
// states too; and they agree with an ordinary accumulator to 1e-12
// relative (its rounding error).
func TestExactAgainstBig(t *testing.T) {
	rnd := rand.New(rand.NewPCG(7, 1))
	for _, p := range []int{1, 3, 30} {
		n := 5000
		x := integerPixels(rnd, n, p)
		valid := randomMask(rnd, n, 0.2)
		valid[0], valid[1] = true, true
		wantMean, wantCom := bigStats(x, valid, p)
		var first State
		for trial := range 4 {
			splits := randomSplits(rnd, n, 1+trial*900)
			parts := make([]*Accumulator, len(splits)-1)
			for i := range parts {
				parts[i] = NewExactAccumulator(p)
				parts[i].AddPixels(x[splits[i]*p:splits[i+1]*p], valid[splits[i]:splits[i+1]])
				if trial%2 == 1 { // through a JSON state, as shards are
					data, err := json.Marshal(parts[i].State())
					if err != nil {
						t.Fatal(err)
					}
					var s State
					if err := json.Unmarshal(data, &s); err != nil {
						t.Fatal(err)
					}
					if parts[i], err = FromState(s); err != nil {
						t.Fatal(err)
					}
				}
			}
			rnd.Shuffle(len(parts), func(i, j int) { parts[i], parts[j] = parts[j], parts[i] })
			total := NewExactAccumulator(p)
			for _, a := range parts {
				total.Merge(a)
			}
			if !total.Exact() {
				t.Fatalf("p=%d: integer pixels made the accumulator inexact", p)
			}
			st := total.State()
			if trial == 0 {
				first = st
			} else if !reflect.DeepEqual(st, first) {
				t.Errorf("p=%d trial %d: state differs from the first cut's", p, trial)
			}
			for j := range p {
				if st.Mean[j] != wantMean[j] {
					t.Errorf("p=%d: mean[%d] = %v, want %v (math/big)", p, j, st.Mean[j], wantMean[j])
				}
				for l := j; l < p; l++ {
					if st.CoMoment[j][l] != wantCom[j*p+l] {
						t.Errorf("p=%d: M[%d][%d] = %v, want %v (math/big)", p, j, l, st.CoMoment[j][l], wantCom[j*p+l])
					}
				}
			}
		}
		plain := NewAccumulator(p)
		plain.AddPixels(x, valid)
		got := NewExactAccumulator(p)
		got.AddPixels(x, valid)
		checkRel(t, "mean against an ordinary accumulator", relDiff(got.Mean(nil), plain.Mean(nil)), 1e-12)
		checkRel(t, "co-moment against an ordinary accumulator", relDiffSym(got.CoMoment(nil), plain.CoMoment(nil)), 1e-12)
	}
}

// TestExactFallback: a value that is not an integer, or one beyond
// MaxExact, makes the accumulator ordinary for good, with the statistics of
// an ordinary accumulator (to rounding); Reset makes it exact again.
func TestExactFallback(t *testing.T) {
	rnd := rand.New(rand.NewPCG(8, 1))
	p, n := 4, 3000
	for _, tc := range []struct {
		name string
		v    float64
	}{{"fraction", 12.5}, {"beyond MaxExact", MaxExact + 1}, {"far beyond", 1e30}} {
		x := integerPixels(rnd, n, p)
		x[2000*p+1] = tc.v
		a := NewExactAccumulator(p)
		a.AddPixels(x[:1000*p], nil)
		a.AddPixels(x[1000*p:], nil)
		if a.Exact() {
			t.Errorf("%s: still exact", tc.name)
		}
		r := referenceStats(x, nil, p)
		checkRel(t, tc.name+": mean", relDiff(a.Mean(nil), r.mean), 1e-12)
		checkRel(t, tc.name+": covariance", relDiffSym(a.Covariance(nil), r.cov), 1e-10)
		a.Reset()
		a.AddPixels(x[:1000*p], nil)
		if !a.Exact() {
			t.Errorf("%s: not exact after Reset", tc.name)
		}
	}
	// Merging an ordinary accumulator makes an exact one ordinary.
	x := integerPixels(rnd, 100, p)
	a, b := NewExactAccumulator(p), NewAccumulator(p)
	a.AddPixels(x[:50*p], nil)
	b.AddPixels(x[50*p:], nil)
	a.Merge(b)
	if a.Exact() {
		t.Error("exact after merging an ordinary accumulator")
	}
	r := referenceStats(x, nil, p)
	checkRel(t, "merged covariance", relDiffSym(a.Covariance(nil), r.cov), 1e-12)
}

// TestExactState: tampered or malformed exact sums are refused.
func TestExactState(t *testing.T) {
	a := NewExactAccumulator(2)
	a.AddPixels([]float64{1, 2, 3, 5, 4, 4}, nil)
	for _, tc := range []struct {
		name string
		edit func(*State)
	}{
		{"sum changed", func(s *State) { s.Exact.Sums[0] = "9" }},
		{"product changed", func(s *State) { s.Exact.Products[0][1] = "1" }},
		{"not a number", func(s *State) { s.Exact.Sums[1] = "1e3" }},
		{"too long", func(s *State) { s.Exact.Sums[1] = "340282366920938463463374607431768211456" }},
		{"short row", func(s *State) { s.Exact.Products[1] = nil }},
		{"few sums", func(s *State) { s.Exact.Sums = s.Exact.Sums[:1] }},
		{"count not an integer", func(s *State) { s.Count = 2.5 }},
	} {
		s := a.State()
		tc.edit(&s)
		if _, err := FromState(s); !errors.Is(err, ErrInvalidState) {
			t.Errorf("%s: FromState returned %v, want ErrInvalidState", tc.name, err)
		}
	}
	b, err := FromState(a.State())
	if err != nil || !b.Exact() || !reflect.DeepEqual(b.State(), a.State()) {
		t.Errorf("round trip: %v, exact %v", err, b != nil && b.Exact())
	}
	neg := int128{hi: -3, lo: 12345}
	var z big.Int
	if back, ok := int128Of(neg.big(&z)); !ok || back != neg {
		t.Errorf("int128 %v → %s → %v", neg, z.String(), back)
	}
}
