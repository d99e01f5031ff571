package bands

import (
	"errors"
	"fmt"
	"math/big"
	"math/bits"
)

// MaxExact is the largest magnitude of a value that an exact accumulator
// (NewExactAccumulator) sums exactly: 2¹⁷, enough for any 16-bit sample
// and for the difference of two. A product of two such values is below
// 2³⁵, and a chunk of at most 2¹⁷ pixels sums them below 2⁵² and so
// exactly in float64, in any order (see the package documentation).
const MaxExact = 1 << 17

// maxExactChunk is the most pixels of a chunk whose product is summed in
// float64: 2¹⁷ terms below 2³⁵ sum below 2⁵², exactly.
const maxExactChunk = 1 << 17

// int128 is a two's-complement 128-bit integer: hi·2⁶⁴ + lo.
type int128 struct {
	hi int64
	lo uint64
}

func (x *int128) add(v int64) {
	lo, c := bits.Add64(x.lo, uint64(v), 0)
	x.lo, x.hi = lo, x.hi+v>>63+int64(c)
}

func (x *int128) addInt(y int128) {
	lo, c := bits.Add64(x.lo, y.lo, 0)
	x.lo, x.hi = lo, x.hi+y.hi+int64(c)
}

// big sets z to x and returns z.
func (x int128) big(z *big.Int) *big.Int {
	var lo big.Int
	z.SetInt64(x.hi)
	z.Lsh(z, 64)
	return z.Add(z, lo.SetUint64(x.lo))
}

var mask64 = new(big.Int).SetUint64(^uint64(0))

// int128Of returns z as an int128, or false if it does not fit.
func int128Of(z *big.Int) (int128, bool) {
	if z.BitLen() > 127 {
		return int128{}, false
	}
	var lo, hi big.Int
	lo.And(z, mask64)
	hi.Rsh(z, 64)
	return int128{hi: hi.Int64(), lo: lo.Uint64()}, true
}

// exactSums are the raw sums of an exact accumulator: the count n, the
// sums s = Σx and the products P = Σxxᵀ (upper triangle of a p×p
// row-major matrix), all integers.
type exactSums struct {
	n    int64
	sum  []int128
	prod []int128
}

func newExactSums(p int) *exactSums {
	return &exactSums{sum: make([]int128, p), prod: make([]int128, p*p)}
}

func (e *exactSums) reset() {
	e.n = 0
	clear(e.sum)
	clear(e.prod)
}

// NewExactAccumulator returns an empty accumulator for pixels of p bands
// that sums integer values exactly. While every value it is given (through
// AddPixels or AddShiftDifferences) is an integer of magnitude at most
// MaxExact, it keeps the count, the sums and the sums of products as exact
// integers, merges with other exact accumulators by adding them, and
// derives the mean and the co-moment from them rounded once, correctly:
//
//	mean = s/n,  M = (n·P − s·sᵀ)/n.
//
// So its statistics do not depend on how the pixels were cut into blocks,
// tiles or shards, nor on the order of the merges: they are bit-identical.
// At the first block holding any other value it becomes an ordinary
// accumulator for good (Exact reports false), with the same results up to
// rounding; Reset makes it exact again.
func NewExactAccumulator(p int) *Accumulator {
	a := NewAccumulator(p)
	a.wantExact = true
	a.exact = newExactSums(p)
	return a
}

// Exact reports whether a keeps exact integer sums (see NewExactAccumulator).
func (a *Accumulator) Exact() bool { return a.exact != nil }

// addExact adds the product of the k unshifted pixels that raw or putRaw
// left in a.blk (after product) to a's exact sums, and their extremes.
func (a *Accumulator) addExact(k int) {
	b := a.blk
	a.addProduct(b.aug, k)
	for i := range a.p {
		a.min[i] = min(a.min[i], b.min[i])
		a.max[i] = max(a.max[i], b.max[i])
	}
}

// addProduct adds to a's exact sums the product aug of k rows [x 1]
// (the upper triangle of (p+1)×(p+1), as product leaves it).
func (a *Accumulator) addProduct(aug []float64, k int) {
	e, p := a.exact, a.p
	q := p + 1
	for i := range p {
		row, arow := e.prod[i*p+i:i*p+p], aug[i*q+i:i*q+p]
		for j, v := range arow {
			row[j].add(int64(v))
		}
		e.sum[i].add(int64(aug[i*q+p]))
	}
	e.n += int64(k)
	a.n = float64(e.n)
	a.stale = true
}

// mergeExact adds the exact sums of b to a's; both must be exact.
func (a *Accumulator) mergeExact(b *Accumulator) {
	if b.exact.n == 0 {
		return
	}
	e := a.exact
	for i := range a.p {
		e.sum[i].addInt(b.exact.sum[i])
		for j := i; j < a.p; j++ {
			e.prod[i*a.p+j].addInt(b.exact.prod[i*a.p+j])
		}
		a.min[i] = min(a.min[i], b.min[i])
		a.max[i] = max(a.max[i], b.max[i])
	}
	e.n += b.exact.n
	a.n = float64(e.n)
	a.stale = true
}

// sync derives the mean and the co-moment from the exact sums when they
// are out of date: each the exact rational value rounded to the nearest
// float64 (big.Float's Quo rounds correctly).
func (a *Accumulator) sync() {
	if a.exact == nil || !a.stale {
		return
	}
	a.stale = false
	e, p := a.exact, a.p
	if e.n == 0 {
		clear(a.mean)
		clear(a.com)
		return
	}
	n := new(big.Int).SetInt64(e.n)
	fn := new(big.Float).SetInt(n)
	sums := make([]big.Int, p)
	for i := range p {
		e.sum[i].big(&sums[i])
		a.mean[i] = quotient(&sums[i], fn)
	}
	var num, t big.Int
	for i := range p {
		for j := i; j < p; j++ {
			e.prod[i*p+j].big(&num)
			num.Mul(&num, n)
			num.Sub(&num, t.Mul(&sums[i], &sums[j]))
			a.com[i*p+j] = quotient(&num, fn)
		}
	}
}

// quotient returns x/n rounded to the nearest float64.
func quotient(x *big.Int, n *big.Float) float64 {
	var fx, z big.Float
	fx.SetInt(x)
	f, _ := z.SetPrec(53).Quo(&fx, n).Float64()
	return f
}

// dropExact makes a an ordinary accumulator, its statistics derived.
func (a *Accumulator) dropExact() {
	a.sync()
	a.exact = nil
}

// ExactState holds the exact integer sums of an exact accumulator as
// decimal strings (JSON numbers beyond 2⁵³ do not survive every reader):
// Sums[i] = Σ x_i and Products[i][j−i] = Σ x_i·x_j for j ≥ i.
type ExactState struct {
	Sums     []string   `json:"sums"`
	Products [][]string `json:"products"`
}

func (a *Accumulator) exactState() *ExactState {
	e, p := a.exact, a.p
	s := &ExactState{Sums: make([]string, p), Products: make([][]string, p)}
	var z big.Int
	for i := range p {
		s.Sums[i] = e.sum[i].big(&z).String()
		row := make([]string, p-i)
		for j := range row {
			row[j] = e.prod[i*p+i+j].big(&z).String()
		}
		s.Products[i] = row
	}
	return s
}

// fromExactState restores exact sums into a, a fresh accumulator of the
// state's band count, and checks that they give the state's count, mean
// and co-moment bit for bit.
func (a *Accumulator) fromExactState(s State) error {
	x, p := s.Exact, a.p
	if len(x.Sums) != p || len(x.Products) != p {
		return fmt.Errorf("exact sums for %d and %d bands, want %d", len(x.Sums), len(x.Products), p)
	}
	if s.Count != float64(int64(s.Count)) {
		return fmt.Errorf("exact sums with a count of %v, not an integer", s.Count)
	}
	e := newExactSums(p)
	e.n = int64(s.Count)
	parse := func(v string) (int128, error) {
		z, ok := new(big.Int).SetString(v, 10)
		if !ok {
			return int128{}, fmt.Errorf("exact sum %q is not a decimal integer", v)
		}
		i, ok := int128Of(z)
		if !ok {
			return int128{}, fmt.Errorf("exact sum %s has more than 127 bits", v)
		}
		return i, nil
	}
	var err error
	for i := range p {
		if e.sum[i], err = parse(x.Sums[i]); err != nil {
			return err
		}
		if len(x.Products[i]) != p-i {
			return fmt.Errorf("exact products row %d has %d values, want %d", i, len(x.Products[i]), p-i)
		}
		for j, v := range x.Products[i] {
			if e.prod[i*p+i+j], err = parse(v); err != nil {
				return err
			}
		}
	}
	a.wantExact, a.exact, a.stale = true, e, true
	a.sync()
	for i := range p {
		if a.mean[i] != s.Mean[i] {
			return errExactDisagree
		}
		for j := i; j < p; j++ {
			if a.com[i*p+j] != s.CoMoment[i][j] {
				return errExactDisagree
			}
		}
	}
	return nil
}

var errExactDisagree = errors.New("exact sums disagree with the mean or the co-moment")
