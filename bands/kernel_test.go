package bands

import (
	"fmt"
	"math/big"
	"math/rand/v2"
	"reflect"
	"testing"
)

// intData is a band-sequential tile: the values x[b·n+k] + shift[b].
type intData struct {
	x     []int16
	shift []int32
	n, p  int
}

// pixels returns the values as float64, pixel-major, for AddPixels.
func (d intData) pixels() []float64 {
	f := make([]float64, d.n*d.p)
	for b := range d.p {
		for k := range d.n {
			f[k*d.p+b] = float64(int32(d.x[b*d.n+k]) + shiftOf(d.shift, b))
		}
	}
	return f
}

// intCases are tiles of integer values at the kernel's edges. In the
// "edge" cases every pixel's values share one sign pattern, so that every
// centred product is +m² and an int32 lane reaches 2·s·m² after s steps:
// the most that stepLimit allows. want says whether the kernel takes the
// tile (false: AddPixels' path).
var intCases = []struct {
	name   string
	kernel bool
	gen    func(rnd *rand.Rand, n, p int) intData
}{
	{"int16 random", true, func(rnd *rand.Rand, n, p int) intData {
		return tileOf(n, p, nil, func(k, b int) int32 { return int32(b*300-2000) + rnd.Int32N(9000) })
	}},
	{"int16 shifted", true, func(rnd *rand.Rand, n, p int) intData {
		shift := make([]int32, p)
		for b := range shift {
			shift[b] = int32(b%64*977 - 40000)
		}
		return tileOf(n, p, shift, func(k, b int) int32 { return rnd.Int32N(60000) - 30000 })
	}},
	{"edge ±32767", true, signs(0, 32767)},
	{"edge ±23170 (2 steps)", true, signs(0, 23170)},
	{"edge ±23171 (1 step)", true, signs(0, 23171)},
	{"uint16 1..65535, shift 32768", true, signs(32768, 32767)},
	{"uint16 0..65534, shift 32768", true, func(rnd *rand.Rand, n, p int) intData {
		d := signs(32768, 32767)(rnd, n, p)
		for i, v := range d.x {
			d.x[i] = v - 1 // -32768 .. 32766: centred on -1
		}
		return d
	}},
	{"uint16 0..65535, no shift fits", false, func(rnd *rand.Rand, n, p int) intData {
		shift := make([]int32, p)
		for b := range shift {
			shift[b] = 32768
		}
		return tileOf(n, p, shift, func(k, b int) int32 { return []int32{-32768, 32767}[k%2] })
	}},
	{"int16 -32768..32767", false, func(rnd *rand.Rand, n, p int) intData {
		return tileOf(n, p, nil, func(k, b int) int32 { return []int32{-32768, 32767, 5}[(k+b)%3] })
	}},
	{"uint8", true, func(rnd *rand.Rand, n, p int) intData {
		return tileOf(n, p, nil, func(k, b int) int32 { return []int32{0, 255, rnd.Int32N(256)}[(k+b)%3] })
	}},
}

// signs returns a generator of values ±m (stored; plus shift) with one
// random sign per pixel shared by every band.
func signs(shift, m int32) func(rnd *rand.Rand, n, p int) intData {
	return func(rnd *rand.Rand, n, p int) intData {
		sg := make([]int32, n)
		for k := range sg {
			sg[k] = 1 - 2*rnd.Int32N(2)
		}
		sh := make([]int32, p)
		for b := range sh {
			sh[b] = shift
		}
		return tileOf(n, p, sh, func(k, b int) int32 { return sg[k] * m })
	}
}

func tileOf(n, p int, shift []int32, v func(k, b int) int32) intData {
	d := intData{x: make([]int16, n*p), shift: shift, n: n, p: p}
	for b := range p {
		for k := range n {
			d.x[b*n+k] = int16(v(k, b))
		}
	}
	return d
}

// bigSums returns the count, Σx and Σxᵢxⱼ (j ≥ i) of the valid pixels of
// pixel-major x in math/big integers.
func bigSums(x []float64, valid []bool, p int) (int64, []big.Int, []big.Int) {
	sums, prods := make([]big.Int, p), make([]big.Int, p*p)
	var n int64
	var t, u big.Int
	for k := range len(x) / p {
		if valid != nil && !valid[k] {
			continue
		}
		n++
		px := x[k*p : k*p+p]
		for i := range p {
			sums[i].Add(&sums[i], t.SetInt64(int64(px[i])))
			for j := i; j < p; j++ {
				t.SetInt64(int64(px[i]))
				prods[i*p+j].Add(&prods[i*p+j], t.Mul(&t, u.SetInt64(int64(px[j]))))
			}
		}
	}
	return n, sums, prods
}

// checkBig compares a's exact sums with math/big's.
func checkBig(t *testing.T, a *Accumulator, x []float64, valid []bool) {
	t.Helper()
	p := a.p
	n, sums, prods := bigSums(x, valid, p)
	if a.exact.n != n {
		t.Fatalf("count %d, math/big %d", a.exact.n, n)
	}
	var z big.Int
	for i := range p {
		if a.exact.sum[i].big(&z).Cmp(&sums[i]) != 0 {
			t.Fatalf("Σx[%d] = %v, math/big %v", i, &z, &sums[i])
		}
		for j := i; j < p; j++ {
			if a.exact.prod[i*p+j].big(&z).Cmp(&prods[i*p+j]) != 0 {
				t.Fatalf("Σx[%d]x[%d] = %v, math/big %v", i, j, &z, &prods[i*p+j])
			}
		}
	}
}

// checkSame reports whether got's exact sums and state are those of want,
// bit for bit.
func checkSame(t *testing.T, what string, got, want *Accumulator) {
	t.Helper()
	if !got.Exact() || !want.Exact() {
		t.Fatalf("%s: exact %v, reference exact %v", what, got.Exact(), want.Exact())
	}
	if !reflect.DeepEqual(got.exact, want.exact) {
		t.Fatalf("%s: exact sums differ from the float64 path's", what)
	}
	if !reflect.DeepEqual(got.State(), want.State()) {
		t.Fatalf("%s: state differs from the float64 path's", what)
	}
}

// TestAddInt16Tile: the integer kernel's exact sums are math/big's, and
// the same integers (so the same state, bit for bit) as AddPixels' float64
// exact path on the same pixels, for every kernel path, band counts from 1
// to 224, odd pixel counts, masks (none, random, empty), random values and
// the values at the edge of the kernel's range (see intCases), in tiles
// cut at random. Tiles the kernel cannot take go through AddPixels and stay
// exact.
func TestAddInt16Tile(t *testing.T) {
	for _, p := range []int{1, 2, 3, 7, 12, 64, 224} {
		n := max(2501, 40001/p) | 1
		for ci, c := range intCases {
			rnd := rand.New(rand.NewPCG(uint64(p), uint64(ci)))
			d := c.gen(rnd, n, p)
			if kernel := kernelTakes(p, d); kernel != c.kernel {
				t.Errorf("p=%d %s: kernel takes the tile: %v, want %v", p, c.name, kernel, c.kernel)
			}
			for _, mask := range []string{"none", "random", "empty"} {
				var valid []bool
				switch mask {
				case "random":
					valid = randomMask(rnd, n, 0.8)
				case "empty":
					valid = make([]bool, n)
				}
				want := NewExactAccumulator(p)
				want.AddPixels(d.pixels(), valid)
				if p <= 12 || (p == 64 && mask == "random" && ci < 3) {
					checkBig(t, want, d.pixels(), valid) // so got's sums, the same, are math/big's too
				}
				eachISA(func(isa ISA) {
					what := fmt.Sprintf("%v p=%d %s mask %s", isa, p, c.name, mask)
					got := NewExactAccumulator(p)
					got.AddInt16Tile(d.x, valid, d.shift)
					checkSame(t, what, got, want)
				})
			}
		}
	}
}

// eachISA calls f once for each path of the integer kernel this CPU has,
// with kernelISA set to it.
func eachISA(f func(isa ISA)) {
	old, oldScalar := kernelISA, scalarKernel
	defer func() { kernelISA, scalarKernel = old, oldScalar }()
	scalarKernel = true
	for _, isa := range KernelISAs() {
		kernelISA = isa
		f(isa)
	}
}

// fixture returns the generator of its data, tile case ci of n pixels
// of p bands and a random mask keeping about frac of them.
func fixture(seed uint64, ci, n, p int, frac float64) (*rand.Rand, intData, []bool) {
	rnd := rand.New(rand.NewPCG(seed, uint64(ci)))
	d := intCases[ci].gen(rnd, n, p)
	return rnd, d, randomMask(rnd, n, frac)
}

// kernelTakes reports whether the kernel's plan accepts the tile d.
func kernelTakes(p int, d intData) bool {
	ks := newIntScratch(p)
	tl := intTile{x: d.x, ld: d.n, p: p, n: d.n, valid: make([]bool, d.n)}
	for i := range tl.valid {
		tl.valid[i] = true
	}
	extremesGo(tl, ks.lo, ks.hi)
	return ks.plan(d.shift)
}

// TestAddInt16TileParts: a tile added whole, in parts of rows of any
// size, or through pieces of a few pixels (kernelPiece cut down) gives the
// same exact sums: known by construction, since integer sums do not
// depend on their order.
func TestAddInt16TileParts(t *testing.T) {
	old := kernelPiece
	defer func() { kernelPiece = old }()
	p, n := 12, 3001
	rnd, d, valid := fixture(3, 1, n, p, 0.7)
	want := NewExactAccumulator(p)
	want.AddPixels(d.pixels(), valid)
	kernelPiece = 97
	eachISA(func(isa ISA) {
		got := NewExactAccumulator(p)
		for start := 0; start < n; {
			end := min(n, start+1+rnd.IntN(700))
			part := make([]int16, 0, (end-start)*p)
			for b := range p {
				part = append(part, d.x[b*n+start:b*n+end]...)
			}
			got.AddInt16Tile(part, valid[start:end], d.shift)
			start = end
		}
		checkSame(t, isa.String()+" parts", got, want)
	})
}

// TestAddInt16TileOrdinary: on an ordinary accumulator the tile takes
// AddPixels' float64 path and agrees with AddPixels on the whole tile to
// rounding (1e-12 relative: the chunks are cut elsewhere).
func TestAddInt16TileOrdinary(t *testing.T) {
	p, n := 7, 20001
	_, d, valid := fixture(5, 0, n, p, 0.9)
	want := NewAccumulator(p)
	want.AddPixels(d.pixels(), valid)
	got := NewAccumulator(p)
	got.AddInt16Tile(d.x, valid, d.shift)
	if got.Exact() || got.Count() != want.Count() {
		t.Fatalf("count %v, want %v", got.Count(), want.Count())
	}
	checkRel(t, "mean", relDiff(got.Mean(nil), want.Mean(nil)), tolExact)
	checkRel(t, "co-moment", relDiffSym(got.CoMoment(nil), want.CoMoment(nil)), tolExact)
}

// TestStepLimit: the step limit is the largest number of steps whose two
// products each of magnitude mi·mj fit an int32 lane (2³¹ − 1), known by
// construction, at the magnitudes where it changes.
func TestStepLimit(t *testing.T) {
	for _, c := range []struct{ mi, mj, want int32 }{
		{32767, 32767, 1}, {23171, 23171, 1}, {23170, 23170, 2}, {32767, 1, 32769},
		{18919, 18919, 2}, {18918, 18918, 3}, {255, 255, 16512}, {1, 1, 1<<30 - 1},
	} {
		got := stepLimit(c.mi, c.mj)
		m := 2 * int64(c.mi) * int64(c.mj)
		if got != c.want || int64(got)*m > 1<<31-1 || int64(got+1)*m <= 1<<31-1 {
			t.Errorf("stepLimit(%d, %d) = %d, want %d", c.mi, c.mj, got, c.want)
		}
	}
}

// TestAddInt16Window: AddInt16Window gives the exact sums of AddWindow on
// the same pixels as float64 (itself checked against AddPixels and
// AddShiftDifferences), bit for bit, for each pair set, halo shape and
// kernel path, with and without the paired path, with differences that fit
// the kernel and differences that do not (±32767 next to each other).
func TestAddInt16Window(t *testing.T) {
	defer func(old bool) { pairKernel = old }(pairKernel)
	for _, pairKernel = range []bool{true, false} {
		testAddInt16Window(t)
	}
}

func testAddInt16Window(t *testing.T) {
	eachISA(func(isa ISA) {
		for _, p := range []int{1, 3, 12, 64} {
			for _, wide := range []bool{false, true} {
				for _, s := range []Shift{Horizontal, Vertical, Both} {
					for _, halo := range [][2]int{{0, 0}, {1, 0}, {0, 1}, {1, 1}} {
						rnd := rand.New(rand.NewPCG(uint64(p), uint64(s)))
						ow, oh := 37, 21
						w, h := ow+halo[0], oh+halo[1]
						d := intCases[0].gen(rnd, w*h, p)
						if wide {
							d = intCases[2].gen(rnd, w*h, p)
						}
						valid := randomMask(rnd, w*h, 0.85)
						fwin := Window{X: d.pixels(), Valid: valid, P: p, W: w, H: h, OwnW: ow, OwnH: oh}
						iwin := Int16Window{X: d.x, Shift: d.shift, Valid: valid, P: p, W: w, H: h, OwnW: ow, OwnH: oh}
						wantM, wantN := NewExactAccumulator(p), NewExactAccumulator(p)
						AddWindow(wantM, wantN, fwin, s)
						gotM, gotN := NewExactAccumulator(p), NewExactAccumulator(p)
						AddInt16Window(gotM, gotN, iwin, s)
						what := fmt.Sprintf("%v paired %v p=%d wide=%v %v halo %v", isa, pairKernel, p, wide, s, halo)
						checkSame(t, what+" pixels", gotM, wantM)
						checkSame(t, what+" differences", gotN, wantN)
					}
				}
			}
		}
	})
}

// TestExtremes: the SIMD extremes pass gives the Go reference's least and
// greatest valid values (or lo > hi with no valid pixel) for pixel counts
// around the 16-value steps, values and their differences at the int16
// limits, the extreme in the tail, and masks full, random and empty.
func TestExtremes(t *testing.T) {
	if len(simdISAs()) == 0 {
		t.Skip("no SIMD path on this CPU or build")
	}
	rnd := rand.New(rand.NewPCG(7, 7))
	for _, n := range []int{1, 15, 16, 17, 31, 33, 100, 1027} {
		for _, off := range []int{0, 1, 3} {
			for _, frac := range []float64{1, 0.5, 0} {
				p := 3
				x := make([]int16, p*(n+off))
				for i := range x {
					x[i] = []int16{-32768, 32767, int16(rnd.Int32N(65536) - 32768)}[rnd.IntN(3)]
				}
				x[(n+off)-1] = -32768 // band 0's last value: the extreme in the tail
				tl := intTile{x: x, ld: n + off, p: p, n: n, off: off, valid: randomMask(rnd, n, frac)}
				lo, hi, glo, ghi := make([]int32, p), make([]int32, p), make([]int32, p), make([]int32, p)
				k, gk := extremesSIMD(tl, lo, hi), extremesGo(tl, glo, ghi)
				for b := range p {
					if k != gk || (gk > 0 && (lo[b] != glo[b] || hi[b] != ghi[b])) || (gk == 0 && lo[b] <= hi[b]) {
						t.Fatalf("n=%d off=%d valid %.1f band %d: %d valid in [%d, %d], Go %d in [%d, %d]",
							n, off, frac, b, k, lo[b], hi[b], gk, glo[b], ghi[b])
					}
				}
			}
		}
	}
}
