package change

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestPairSampleExportMerges: the exports of samples drawn over disjoint
// parts of an image (the shards of a job: every k-th band of rows), added
// to a new PairSample in any order, give every pair exactly the sample of
// one pass over the whole image (known by construction: the n smallest
// keys of a union are among the n smallest of its parts).
func TestPairSampleExportMerges(t *testing.T) {
	const width, height, dates, p, n = 40, 60, 3, 2, 250
	pairs := [][2]int{{0, 1}, {0, 2}}
	rng := rand.New(rand.NewPCG(5, 7))
	N := width * height
	vals, valid := make([]float64, N*dates*p), make([]bool, N*dates)
	for i := range vals {
		vals[i] = math.Round(1000 * rng.Float64())
	}
	for i := range valid {
		valid[i] = rng.Float64() < 0.85
	}
	keys := NewSampler(n, 1, 1)
	// draw samples the rows of the bands of 10 rows numbered k mod shards = i.
	draw := func(i, shards int) *PairSample {
		s := NewPairSample(n, p, dates, pairs, SampleHint(n, int64(N)), int64(N))
		for k := 0; k*10 < height; k++ {
			if k%shards != i {
				continue
			}
			ts := &TileSample{Both: make([]int64, len(pairs))}
			for px := k * 10 * width; px < (k+1)*10*width; px++ {
				v := valid[px*dates : px*dates+dates]
				for q, pr := range pairs {
					if v[pr[0]] && v[pr[1]] {
						ts.Both[q]++
					}
				}
				if key := keys.Key(int64(px)); key < s.Bound() {
					ts.Cands = append(ts.Cands, Candidate{Key: key, Index: int64(px)})
					ts.Valid, ts.Vals = append(ts.Valid, v...), append(ts.Vals, vals[px*dates*p:(px+1)*dates*p]...)
				}
			}
			s.Add(ts)
		}
		return s
	}
	whole := draw(0, 1)
	whole.Finish()
	tests := []struct {
		name   string
		shards int
		order  []int
	}{
		{"one shard", 1, []int{0}},
		{"two shards", 2, []int{0, 1}},
		{"three shards, reversed", 3, []int{2, 1, 0}},
		{"seven shards, shuffled", 7, []int{3, 6, 0, 5, 1, 4, 2}},
	}
	for _, tc := range tests {
		merged := NewPairSample(n, p, dates, pairs, math.MaxUint64, int64(N))
		for _, i := range tc.order {
			merged.Add(draw(i, tc.shards).Export())
		}
		if !merged.Complete() {
			t.Fatalf("%s: merged sample incomplete", tc.name)
		}
		merged.Finish()
		for q := range pairs {
			wa, wb := whole.Pair(q)
			ma, mb := merged.Pair(q)
			if !slices.Equal(wa, ma) || !slices.Equal(wb, mb) || whole.Both(q) != merged.Both(q) {
				t.Errorf("%s: pair %d: merged sample of %d values differs from the whole's %d", tc.name, q, len(ma), len(wa))
			}
		}
	}
}
