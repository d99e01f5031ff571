package change

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// Sampler draws a bounded, reproducible sample of pixels for Fit. It keeps the
// n offered pixels with the smallest keys
//
//	key(index) = mix(index XOR mix(seed + γ))
//
// where index is the pixel's position in the image (for example row·width +
// column), mix is the 64-bit finaliser of SplitMix64 and γ = 0x9e3779b97f4a7c15
// (G. L. Steele, D. Lea and C. H. Flood, "Fast splittable pseudorandom number
// generators", OOPSLA 2014). Because mix is a bijection on 64-bit words,
// distinct indices have distinct keys, and the kept set is the bottom-n of a
// pseudo-random permutation of the indices: a simple random sample without
// replacement that depends only on the set of indices offered and the seed,
// not on the order of the offers (a "bottom-k sketch": E. Cohen and H. Kaplan,
// "Summarizing data using bottom-k sketches", PODC 2007). Tiles can therefore
// be read in any order, or by several workers each with its own Sampler
// combined with Merge, and the sample is the same. A sequential reservoir
// (Algorithm R) would instead depend on the order in which pixels arrive.
//
// Each index must be offered at most once. Memory is n·(k+3) words at most.
// A Sampler is not safe for concurrent use.
type Sampler struct {
	n, k int
	salt uint64
	seen int64
	heap []entry   // max-heap on key: heap[0] is the largest key kept
	vals []float64 // k values per slot
}

type entry struct {
	key   uint64
	index int64
	slot  int
}

// NewSampler returns a Sampler that keeps at most n pixels of k components,
// chosen by seed. It panics if n < 1 or k < 1.
func NewSampler(n, k int, seed uint64) *Sampler {
	if n < 1 || k < 1 {
		panic(fmt.Sprintf("change: sampler of %d pixels of %d components", n, k))
	}
	return &Sampler{n: n, k: k, salt: mix64(seed + 0x9e3779b97f4a7c15)}
}

// mix64 is the finaliser of SplitMix64, a bijection on 64-bit words.
func mix64(x uint64) uint64 {
	x ^= x >> 30
	x *= 0xbf58476d1ce4e5b9
	x ^= x >> 27
	x *= 0x94d049bb133111eb
	x ^= x >> 31
	return x
}

// Offer offers the pixel at position index with values d (k of them, copied
// if the pixel is kept). It panics if len(d) != k.
func (s *Sampler) Offer(index int64, d []float64) {
	if len(d) != s.k {
		panic(fmt.Sprintf("change: offered %d values to a sampler of %d components", len(d), s.k))
	}
	s.seen++
	s.offer(mix64(uint64(index)^s.salt), index, d)
}

// Key returns the priority of the pixel at position index: the Sampler keeps
// the pixels with the smallest keys.
func (s *Sampler) Key(index int64) uint64 { return mix64(uint64(index) ^ s.salt) }

// Bound returns a key that no pixel offered from now on can enter the sample
// with unless its key is smaller: the largest key kept once the Sampler is
// full, the largest uint64 before. Bound only decreases, so a caller that
// gathers pixels for a Sampler (in other goroutines, to be merged later) may
// skip pixels whose Key is not below a Bound read at any earlier time: they
// could never be kept, and the sample stays the same.
func (s *Sampler) Bound() uint64 {
	if len(s.heap) < s.n {
		return math.MaxUint64
	}
	return s.heap[0].key
}

func (s *Sampler) offer(key uint64, index int64, d []float64) {
	if len(s.heap) < s.n {
		slot := len(s.heap)
		s.vals = append(s.vals, d...)
		s.heap = append(s.heap, entry{key, index, slot})
		s.up(len(s.heap) - 1)
		return
	}
	if key >= s.heap[0].key {
		return
	}
	slot := s.heap[0].slot
	copy(s.vals[slot*s.k:(slot+1)*s.k], d)
	s.heap[0] = entry{key, index, slot}
	s.down(0)
}

func (s *Sampler) up(i int) {
	h := s.heap
	for i > 0 {
		p := (i - 1) / 2
		if h[p].key >= h[i].key {
			break
		}
		h[p], h[i] = h[i], h[p]
		i = p
	}
}

func (s *Sampler) down(i int) {
	h := s.heap
	for {
		c := 2*i + 1
		if c >= len(h) {
			return
		}
		if c+1 < len(h) && h[c+1].key > h[c].key {
			c++
		}
		if h[i].key >= h[c].key {
			return
		}
		h[i], h[c] = h[c], h[i]
		i = c
	}
}

// Merge adds the pixels kept by o to s, as if every pixel offered to o had
// been offered to s. The two must have been offered disjoint sets of indices.
// Merge panics if o was made with a different size, number of components or
// seed.
func (s *Sampler) Merge(o *Sampler) {
	if o.n != s.n || o.k != s.k || o.salt != s.salt {
		panic("change: merging samplers of different size, components or seed")
	}
	for _, e := range o.heap {
		s.offer(e.key, e.index, o.vals[e.slot*o.k:(e.slot+1)*o.k])
	}
	s.seen += o.seen
}

// Len returns the number of pixels kept: the smaller of n and Seen.
func (s *Sampler) Len() int { return len(s.heap) }

// Seen returns the number of pixels offered, including those offered to
// samplers merged into s.
func (s *Sampler) Seen() int64 { return s.seen }

// Pixels returns the kept pixels in increasing order of index: their indices
// and their values, pixel-major (Len·k values, ready for Fit). Both slices
// are new.
func (s *Sampler) Pixels() (index []int64, d []float64) {
	order := slices.Clone(s.heap)
	slices.SortFunc(order, func(a, b entry) int { return cmp.Compare(a.index, b.index) })
	index = make([]int64, len(order))
	d = make([]float64, 0, len(order)*s.k)
	for i, e := range order {
		index[i] = e.index
		d = append(d, s.vals[e.slot*s.k:(e.slot+1)*s.k]...)
	}
	return index, d
}
