package change

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestPairSampleIsSamplersSample: for every pair, the shared sample
// must be exactly what a Sampler of that pair draws (the reference: the
// single-pair sampler, fed the pair's pixels valid on both
// dates), tile by tile in any order, with or without the hint, and the
// hint must report itself incomplete when most pixels are nodata.
func TestPairSampleIsSamplersSample(t *testing.T) {
	const width, height, dates, p = 64, 48, 4, 2
	pairs := [][2]int{{0, 1}, {1, 2}, {2, 3}, {0, 2}, {1, 3}}
	tests := []struct {
		name     string
		n        int
		validity float64 // share of valid pixels per date
		hint     bool
		complete bool
	}{
		{"no hint, all valid", 300, 1, false, true},
		{"hint, all valid", 300, 1, true, true},
		{"hint, some nodata", 200, 0.8, true, true},
		{"no hint, more wanted than valid", 5000, 0.9, false, true},
		{"hint, mostly nodata", 300, 0.1, true, false},
	}
	for _, tc := range tests {
		rng := rand.New(rand.NewPCG(3, uint64(tc.n)))
		N := width * height
		vals := make([]float64, N*dates*p)
		valid := make([]bool, N*dates)
		for i := range vals {
			vals[i] = math.Round(1000 * rng.Float64())
		}
		for i := range valid {
			valid[i] = rng.Float64() < tc.validity
		}
		hint := uint64(math.MaxUint64)
		if tc.hint {
			hint = SampleHint(tc.n, int64(N))
		}
		draw := func(hint uint64) *PairSample {
			s := NewPairSample(tc.n, p, dates, pairs, hint, int64(N))
			keys := NewSampler(tc.n, 1, 1)
			// Tiles of 16 rows, delivered last first.
			for y0 := height - 16; y0 >= 0; y0 -= 16 {
				ts := &TileSample{Both: make([]int64, len(pairs))}
				bound := s.Bound()
				for i := y0 * width; i < (y0+16)*width; i++ {
					v := valid[i*dates : i*dates+dates]
					for q, pr := range pairs {
						if v[pr[0]] && v[pr[1]] {
							ts.Both[q]++
						}
					}
					if key := keys.Key(int64(i)); key < bound {
						ts.Cands = append(ts.Cands, Candidate{Key: key, Index: int64(i)})
						ts.Valid = append(ts.Valid, v...)
						ts.Vals = append(ts.Vals, vals[i*dates*p:(i+1)*dates*p]...)
					}
				}
				s.Add(ts)
			}
			return s
		}
		s := draw(hint)
		if s.Complete() != tc.complete {
			t.Fatalf("%s: complete = %v, want %v", tc.name, s.Complete(), tc.complete)
		}
		if !tc.complete {
			// As the series engine's sample pass does: again with the looser hint.
			h := s.RetryHint()
			if h <= hint {
				t.Errorf("%s: the retry's hint %x is no looser than %x", tc.name, h, hint)
			}
			if s = draw(h); !s.Complete() {
				t.Fatalf("%s: the retry came short too", tc.name)
			}
		}
		s.Finish()
		for q, pr := range pairs {
			ref := NewSampler(tc.n, 2*p, 1)
			for i := range N {
				if valid[i*dates+pr[0]] && valid[i*dates+pr[1]] {
					row := vals[i*dates*p : (i+1)*dates*p]
					ref.Offer(int64(i), append(slices.Clone(row[pr[0]*p:pr[0]*p+p]), row[pr[1]*p:pr[1]*p+p]...))
				}
			}
			_, both := ref.Pixels()
			xb, xa := s.Pair(q)
			var got []float64
			for i := range len(xb) / p {
				got = append(append(got, xb[i*p:i*p+p]...), xa[i*p:i*p+p]...)
			}
			if !slices.Equal(got, both) {
				t.Errorf("%s, pair %v: %d sampled pixels differ from the Sampler's %d", tc.name, pr, len(got)/(2*p), len(both)/(2*p))
			}
		}
	}
}
