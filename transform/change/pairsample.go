package change

import (
	"cmp"
	"math"
	"slices"
)

// PairSample draws, for every pair of dates scored, exactly the sample a
// Sampler of seed 1 draws for that pair: the n pixels valid
// on both dates with the smallest keys, in order of index. It holds each
// candidate pixel once, with its values on every date, instead of one
// sampler per pair holding both dates: the pairs of a series share most of
// their sampled pixels.
//
// A key at or above hint is never taken: the workers then hand over only
// the few percent of a tile's pixels that can be sampled, even before the
// pairs' samples are full. hint is set so that a pair has n pixels below
// it unless most of its pixels are nodata; when a pair has not (complete
// reports it), the pass is run again without one.
type PairSample struct {
	n, p, dates int
	pairs       [][2]int
	hint        uint64
	heaps       []keyHeap // per pair: the n smallest keys offered to it
	both        []int64   // per pair: the pixels valid on both dates
	cands       []Candidate
	valid       []bool    // dates flags per candidate
	vals        []float64 // dates*p values per candidate
	pruned      int       // len(cands) after the last prune
	order       []int     // the candidates by index, after finish
}

// Candidate is a pixel that may be in the sample of some pair: its key
// (Sampler.Key of its index) and its index in the image, row-major.
type Candidate struct {
	Key   uint64
	Index int64
}

// SampleHint is the bound hint of a sample of n of pixels pixels: four
// times the key share of n, so that a pair with at least a third of its
// pixels valid has n below it all but surely (their count is binomial with
// mean 4n times that share), or no hint (math.MaxUint64) when that covers
// the key space.
func SampleHint(n int, pixels int64) uint64 {
	share := 4 * float64(n) / float64(pixels)
	if share >= 1 {
		return math.MaxUint64
	}
	return uint64(math.Ldexp(share, 64))
}

// NewPairSample holds room for the candidates of a sample of n of up to
// pixels pixels: n and the slack pruning leaves.
func NewPairSample(n, p, dates int, pairs [][2]int, hint uint64, pixels int64) *PairSample {
	room := int(min(int64(n+n/4), pixels))
	return &PairSample{n: n, p: p, dates: dates, pairs: pairs, hint: hint,
		heaps: make([]keyHeap, len(pairs)), both: make([]int64, len(pairs)),
		cands: make([]Candidate, 0, room), valid: make([]bool, 0, room*dates), vals: make([]float64, 0, room*dates*p)}
}

// TileSample is what a worker hands over from one tile: its candidates
// below the bound it read, and each pair's valid pixels.
type TileSample struct {
	Cands []Candidate
	// Valid holds dates flags per candidate, Vals dates·p values per
	// candidate (each date's bands in turn), Both per pair the tile's
	// pixels valid on both its dates.
	Valid []bool
	Vals  []float64
	Both  []int64
}

// Bound is the key no pixel at or above of which can enter any pair's
// sample from now on: the largest of the pairs' bounds (each the largest
// key it keeps once full), at most the hint.
func (s *PairSample) Bound() uint64 {
	b := uint64(0)
	for _, h := range s.heaps {
		if len(h) < s.n {
			return s.hint
		}
		b = max(b, h[0])
	}
	return min(b, s.hint)
}

// Add merges a tile's candidates: each is offered to the pairs it is
// valid on both dates of, and kept while some pair keeps it.
func (s *PairSample) Add(t *TileSample) {
	for q, n := range t.Both {
		s.both[q] += n
	}
	D, P := s.dates, s.dates*s.p
	if len(s.cands)+len(t.Cands) > cap(s.cands) && len(s.cands) > s.pruned {
		s.prune() // before the slices grow
	}
	for c, cd := range t.Cands {
		v := t.Valid[c*D : c*D+D]
		kept := false
		for q, pr := range s.pairs {
			if v[pr[0]] && v[pr[1]] && s.heaps[q].offer(cd.Key, s.n) {
				kept = true
			}
		}
		if kept {
			s.cands = append(s.cands, cd)
			s.valid = append(s.valid, v...)
			s.vals = append(s.vals, t.Vals[c*P:c*P+P]...)
		}
	}
	if len(s.cands) > s.pruned+s.n/4 {
		s.prune()
	}
}

// prune drops the candidates no pair keeps any longer.
func (s *PairSample) prune() {
	D, P := s.dates, s.dates*s.p
	k := 0
	for c, cd := range s.cands {
		if !s.needed(cd.Key, s.valid[c*D:c*D+D]) {
			continue
		}
		s.cands[k] = cd
		copy(s.valid[k*D:k*D+D], s.valid[c*D:c*D+D])
		copy(s.vals[k*P:k*P+P], s.vals[c*P:c*P+P])
		k++
	}
	s.cands, s.valid, s.vals = s.cands[:k], s.valid[:k*D], s.vals[:k*P]
	s.pruned = k
}

// needed reports whether some pair valid on the candidate's dates keeps
// its key: keys are distinct, so a key no larger than a pair's largest
// kept one, offered to that pair, is in its sample.
func (s *PairSample) needed(key uint64, v []bool) bool {
	for q, pr := range s.pairs {
		if v[pr[0]] && v[pr[1]] && (len(s.heaps[q]) < s.n || key <= s.heaps[q][0]) {
			return true
		}
	}
	return false
}

// Complete reports whether every pair's sample is what a pass without a
// hint would draw: full, or holding every pixel valid on both its dates.
func (s *PairSample) Complete() bool {
	for q, h := range s.heaps {
		if len(h) < s.n && int64(len(h)) < s.both[q] {
			return false
		}
	}
	return true
}

// Finish orders the candidates by index, as Sampler.Pixels returns
// its pixels.
func (s *PairSample) Finish() {
	s.prune()
	s.order = make([]int, len(s.cands))
	for i := range s.order {
		s.order[i] = i
	}
	slices.SortFunc(s.order, func(a, b int) int { return cmp.Compare(s.cands[a].Index, s.cands[b].Index) })
}

// Pair returns pair q's sample, after finish: the values on its first and
// second date, pixel-major, in order of index.
func (s *PairSample) Pair(q int) (xb, xa []float64) {
	D, P, p := s.dates, s.dates*s.p, s.p
	a, b := s.pairs[q][0], s.pairs[q][1]
	for _, c := range s.order {
		v := s.valid[c*D : c*D+D]
		if !v[a] || !v[b] || (len(s.heaps[q]) == s.n && s.cands[c].Key > s.heaps[q][0]) {
			continue
		}
		row := s.vals[c*P : c*P+P]
		xb = append(xb, row[a*p:a*p+p]...)
		xa = append(xa, row[b*p:b*p+p]...)
	}
	return xb, xa
}

// RetryHint is the hint of a pass run again after this one's came short:
// from the fewest pixels a pair has valid (so that each has n below it
// all but surely), or none if this pass had that hint already.
func (s *PairSample) RetryHint() uint64 {
	fewest := slices.Min(s.both)
	if h := SampleHint(s.n, max(fewest, 1)); h > s.hint {
		return h
	}
	return math.MaxUint64
}

// keyHeap is a max-heap of the smallest keys offered, at most n of them.
type keyHeap []uint64

// offer adds key when fewer than n are kept or it is smaller than the
// largest kept, which it replaces; it reports whether key was kept.
func (h *keyHeap) offer(key uint64, n int) bool {
	k := *h
	if len(k) < n {
		k = append(k, key)
		for i := len(k) - 1; i > 0; {
			up := (i - 1) / 2
			if k[up] >= k[i] {
				break
			}
			k[up], k[i] = k[i], k[up]
			i = up
		}
		*h = k
		return true
	}
	if key >= k[0] {
		return false
	}
	k[0] = key
	for i := 0; ; {
		c := 2*i + 1
		if c >= len(k) {
			break
		}
		if c+1 < len(k) && k[c+1] > k[c] {
			c++
		}
		if k[i] >= k[c] {
			break
		}
		k[i], k[c] = k[c], k[i]
		i = c
	}
	return true
}

// Both returns the number of pixels valid on both dates of pair q seen so
// far.
func (s *PairSample) Both(q int) int64 { return s.both[q] }

// Export returns the candidates s keeps (every pixel some pair's sample may
// still take) with their values, and each pair's count of pixels valid on
// both dates, as one TileSample. The samples of disjoint parts of an image
// (the shards of a job) merge exactly: adding their exports to a new
// PairSample, in any order, keeps the same n smallest keys per pair as one
// pass over the whole image (a key among the n smallest of the whole is
// among the n smallest of its part), so Pair returns the same values.
func (s *PairSample) Export() *TileSample {
	s.prune()
	return &TileSample{Cands: slices.Clone(s.cands), Valid: slices.Clone(s.valid), Vals: slices.Clone(s.vals), Both: slices.Clone(s.both)}
}
