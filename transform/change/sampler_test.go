package change

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// pixelValue is the value stored for pixel i, component j, so that kept
// values can be checked against their index.
func pixelValue(i int64, j int) float64 { return float64(i)*10 + float64(j) }

func offerAll(s *Sampler, order []int64) {
	d := make([]float64, s.k)
	for _, i := range order {
		for j := range d {
			d[j] = pixelValue(i, j)
		}
		s.Offer(i, d)
	}
}

func TestSamplerOrderIndependent(t *testing.T) {
	const total, n, k = 20_000, 500, 2
	order := make([]int64, total)
	for i := range order {
		order[i] = int64(i)
	}
	ref := NewSampler(n, k, 42)
	offerAll(ref, order)
	refIdx, refD := ref.Pixels()
	if ref.Len() != n || len(refIdx) != n || len(refD) != n*k || ref.Seen() != total {
		t.Fatalf("Len %d, %d indices, %d values, Seen %d", ref.Len(), len(refIdx), len(refD), ref.Seen())
	}
	if !slices.IsSorted(refIdx) {
		t.Error("indices not in increasing order")
	}
	for p, i := range refIdx {
		for j := range k {
			if refD[p*k+j] != pixelValue(i, j) {
				t.Fatalf("pixel %d component %d: %v, want %v", i, j, refD[p*k+j], pixelValue(i, j))
			}
		}
	}

	// Shuffled offers, and offers split over 3 workers merged in two
	// different orders, keep the same pixels.
	rng := rand.New(rand.NewPCG(23, 24))
	for trial := range 3 {
		rng.Shuffle(len(order), func(a, b int) { order[a], order[b] = order[b], order[a] })
		s := NewSampler(n, k, 42)
		offerAll(s, order)
		if idx, d := s.Pixels(); !slices.Equal(idx, refIdx) || !slices.Equal(d, refD) {
			t.Fatalf("shuffle %d: different sample", trial)
		}
		w := []*Sampler{NewSampler(n, k, 42), NewSampler(n, k, 42), NewSampler(n, k, 42)}
		for p, i := range order {
			offerAll(w[p%3], []int64{i})
		}
		if trial%2 == 0 {
			w[2].Merge(w[0])
			w[2].Merge(w[1])
			w[0] = w[2]
		} else {
			w[0].Merge(w[1])
			w[0].Merge(w[2])
		}
		if idx, d := w[0].Pixels(); !slices.Equal(idx, refIdx) || !slices.Equal(d, refD) || w[0].Seen() != total {
			t.Fatalf("merge %d: different sample or Seen %d", trial, w[0].Seen())
		}
	}

	// Another seed draws another sample.
	other := NewSampler(n, k, 43)
	offerAll(other, order)
	if idx, _ := other.Pixels(); slices.Equal(idx, refIdx) {
		t.Error("seeds 42 and 43 drew the same sample")
	}

	// The sample is spread over the image: the mean kept index of a
	// uniform sample of 500 from 0..19 999 is 9 999.5 with standard error
	// 20 000/sqrt(12·500) ≈ 258; allow 4 standard errors.
	var mean float64
	for _, i := range refIdx {
		mean += float64(i)
	}
	mean /= n
	if math.Abs(mean-9999.5) > 4*258 {
		t.Errorf("mean kept index %.0f, want 9999.5 ± 1032", mean)
	}
}

func TestSamplerSmall(t *testing.T) {
	// Fewer pixels than room: all kept.
	s := NewSampler(10, 1, 0)
	offerAll(s, []int64{7, 3, 5})
	if idx, d := s.Pixels(); !slices.Equal(idx, []int64{3, 5, 7}) || !slices.Equal(d, []float64{30, 50, 70}) {
		t.Errorf("Pixels = %v, %v", idx, d)
	}
	// Offer copies d.
	s = NewSampler(1, 1, 0)
	d := []float64{1}
	s.Offer(0, d)
	d[0] = 2
	if _, got := s.Pixels(); got[0] != 1 {
		t.Errorf("kept value changed with the caller's slice: %v", got)
	}
}

func BenchmarkSamplerOffer(b *testing.B) {
	s := NewSampler(DefaultSampleSize, 8, 1)
	d := make([]float64, 8)
	var i int64
	for b.Loop() {
		s.Offer(i, d)
		i++
	}
}

// TestSamplerBoundFilter: skipping offers whose Key is not below a Bound read
// earlier leaves the sample unchanged (known by construction of a bottom-k
// sample), and the bound only decreases.
func TestSamplerBoundFilter(t *testing.T) {
	const n, k, total = 50, 2, 5000
	full := NewSampler(n, k, 7)
	filtered := NewSampler(n, k, 7)
	prev := filtered.Bound()
	for start := int64(0); start < total; start += 250 {
		bound := filtered.Bound()
		if bound > prev {
			t.Fatalf("bound grew from %d to %d", prev, bound)
		}
		prev = bound
		part := NewSampler(n, k, 7)
		for i := start; i < start+250; i++ {
			d := []float64{float64(i), -float64(i)}
			full.Offer(i, d)
			if part.Key(i) < bound {
				part.Offer(i, d)
			}
		}
		filtered.Merge(part)
	}
	a, _ := full.Pixels()
	b, _ := filtered.Pixels()
	if len(a) != n || len(b) != n {
		t.Fatalf("sizes %d and %d", len(a), len(b))
	}
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("filtered sample differs at %d: %d vs %d", i, a[i], b[i])
		}
	}
}

// BenchmarkSamplerGather draws a sample of 200 000 pixels of 14 values from
// 64 tiles of 512 x 512 pixels as a scan does: a Sampler per tile, offered
// the pixels below the total's bound, merged into the total in tile order.
func BenchmarkSamplerGather(b *testing.B) {
	const tiles, side, k = 64, 512, 14
	d := make([]float64, k)
	for b.Loop() {
		total := NewSampler(DefaultSampleSize, k, 1)
		for t := range tiles {
			bound := total.Bound()
			part := NewSampler(DefaultSampleSize, k, 1)
			for i := range side * side {
				index := int64(t*side*side + i)
				if part.Key(index) < bound {
					part.Offer(index, d)
				}
			}
			total.Merge(part)
		}
		total.Pixels()
	}
}

// TestSamplerBottomN: the sample is the n offered indices with the smallest
// keys (the definition of a bottom-n sketch), for sizes around the pruning
// points, offered directly and through merged parts.
func TestSamplerBottomN(t *testing.T) {
	for _, n := range []int{1, 2, 3, 7, 64, 1000} {
		for _, total := range []int{n - 1, n, n + n/2, 10*n + 3} {
			if total < 1 {
				continue
			}
			s, merged := NewSampler(n, 1, 5), NewSampler(n, 1, 5)
			keys := make([]int64, total)
			for i := range keys {
				keys[i] = int64(i)
			}
			offerAll(s, keys)
			for start := 0; start < total; start += 17 {
				part := NewSampler(n, 1, 5)
				offerAll(part, keys[start:min(total, start+17)])
				merged.Merge(part)
			}
			slices.SortFunc(keys, func(a, b int64) int { return cmpKey(s, a, b) })
			want := slices.Clone(keys[:min(n, total)])
			slices.Sort(want)
			for name, got := range map[string]*Sampler{"direct": s, "merged": merged} {
				idx, d := got.Pixels()
				if !slices.Equal(idx, want) || got.Len() != len(want) {
					t.Fatalf("n %d, %d offered, %s: kept %v, want %v", n, total, name, idx, want)
				}
				for p, i := range idx {
					if d[p] != pixelValue(i, 0) {
						t.Fatalf("n %d, %d offered, %s: pixel %d holds %v", n, total, name, i, d[p])
					}
				}
			}
		}
	}
}

func cmpKey(s *Sampler, a, b int64) int {
	ka, kb := s.Key(a), s.Key(b)
	switch {
	case ka < kb:
		return -1
	case ka > kb:
		return 1
	}
	return 0
}
