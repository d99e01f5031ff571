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
// Each index must be offered at most once. The Sampler holds its candidates
// unordered and, whenever they reach 3n/2, keeps the n with the smallest
// keys (a selection in linear expected time), so an offer costs a
// comparison and a copy rather than a heap update. Memory is about
// 1.5·n·(k+4) words at most. A Sampler is not safe for concurrent use.
type Sampler struct {
	n, k  int
	salt  uint64
	seen  int64
	bound uint64      // the largest key kept at the last prune once full, else MaxUint64
	cands []entry     // the candidates; after a prune the n smallest keys
	vals  [][]float64 // k values per slot, chunkSlots slots per chunk
	slots int         // slots in vals
	free  []int       // slots of candidates pruned away
}

// chunkSlots is the number of pixels' values held per chunk: values are
// never moved as the candidates grow.
const chunkSlots = 1024

// at returns the values of slot.
func (s *Sampler) at(slot int) []float64 {
	c, i := slot/chunkSlots, slot%chunkSlots
	return s.vals[c][i*s.k : (i+1)*s.k]
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
	return &Sampler{n: n, k: k, salt: mix64(seed + 0x9e3779b97f4a7c15), bound: math.MaxUint64}
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
// with unless its key is smaller: once the Sampler has held n pixels, the
// largest key it kept when it last dropped the candidates beyond the n
// smallest (which Bound does itself when it first holds n, and then each
// time n/8 more arrived); the largest uint64 before. Bound only decreases,
// so a caller that gathers pixels for a Sampler (in other goroutines, to be
// merged later) may skip pixels whose Key is not below a Bound read at any
// earlier time: they could never be kept, and the sample stays the same.
func (s *Sampler) Bound() uint64 {
	if len(s.cands) >= s.n && (s.bound == math.MaxUint64 || len(s.cands) >= s.n+s.n/8) {
		s.prune()
	}
	return s.bound
}

func (s *Sampler) offer(key uint64, index int64, d []float64) {
	if key >= s.bound {
		return
	}
	var slot int
	if f := len(s.free); f > 0 {
		slot, s.free = s.free[f-1], s.free[:f-1]
	} else {
		if s.slots%chunkSlots == 0 {
			s.vals = append(s.vals, make([]float64, chunkSlots*s.k))
		}
		slot = s.slots
		s.slots++
	}
	copy(s.at(slot), d)
	s.cands = append(s.cands, entry{key, index, slot})
	if len(s.cands) >= s.n+max(1, s.n/2) {
		s.prune()
	}
}

// prune keeps the n candidates with the smallest keys and, when there are
// n, lowers the bound to the largest of them.
func (s *Sampler) prune() {
	if len(s.cands) < s.n {
		return
	}
	selectNth(s.cands, s.n-1, func(e entry) uint64 { return e.key })
	for _, e := range s.cands[s.n:] {
		s.free = append(s.free, e.slot)
	}
	s.cands = s.cands[:s.n]
	s.bound = s.cands[s.n-1].key
}

// selectNth reorders c so that c[m] holds the element of the (m+1)-th
// smallest key, with no larger key before it and no smaller after (C. A. R.
// Hoare, "Algorithm 65: Find", Communications of the ACM 4, 1961, with a
// median-of-three pivot): linear time on average, where a sort would take
// n log n. The keys must not be NaN.
func selectNth[E any, K cmp.Ordered](c []E, m int, key func(E) K) {
	lo, hi := 0, len(c)-1
	for hi > lo {
		mid := lo + (hi-lo)/2
		if key(c[mid]) < key(c[lo]) {
			c[mid], c[lo] = c[lo], c[mid]
		}
		if key(c[hi]) < key(c[lo]) {
			c[hi], c[lo] = c[lo], c[hi]
		}
		if key(c[hi]) < key(c[mid]) {
			c[hi], c[mid] = c[mid], c[hi]
		}
		pivot := key(c[mid])
		i, j := lo, hi
		for i <= j {
			for key(c[i]) < pivot {
				i++
			}
			for key(c[j]) > pivot {
				j--
			}
			if i <= j {
				c[i], c[j] = c[j], c[i]
				i++
				j--
			}
		}
		switch {
		case m <= j:
			hi = j
		case m >= i:
			lo = i
		default:
			return
		}
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
	for _, e := range o.cands {
		s.offer(e.key, e.index, o.at(e.slot))
	}
	s.seen += o.seen
}

// Len returns the number of pixels kept: the smaller of n and Seen.
func (s *Sampler) Len() int { return min(len(s.cands), s.n) }

// Seen returns the number of pixels offered, including those offered to
// samplers merged into s.
func (s *Sampler) Seen() int64 { return s.seen }

// Pixels returns the kept pixels in increasing order of index: their indices
// and their values, pixel-major (Len·k values, ready for Fit). Both slices
// are new.
func (s *Sampler) Pixels() (index []int64, d []float64) {
	s.prune()
	order := slices.Clone(s.cands)
	slices.SortFunc(order, func(a, b entry) int { return cmp.Compare(a.index, b.index) })
	index = make([]int64, len(order))
	d = make([]float64, 0, len(order)*s.k)
	for i, e := range order {
		index[i] = e.index
		d = append(d, s.at(e.slot)...)
	}
	return index, d
}
