package bands

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// pairEdgeCases are windows at the edges of the paired path of
// AddInt16Window: each pixel (or each row, byRow) takes one of two stored
// values, the same choice in every band, so that every centred product of
// a pair sum or a difference is +m² and an int32 lane takes the most
// stepLimit allows. paired says whether the paired path takes the window
// (false: the two passes do). Values spanning more than 32767 pixel by
// pixel have differences spanning more than 65534, which the paired path
// refuses too; row by row, their differences are 0 and the pair sums alone
// decide.
var pairEdgeCases = []struct {
	name   string
	lo, hi int16
	shift  int32
	byRow  bool
	paired bool
}{
	// Sums 0 .. 65534 centred on 32767: ±32767, an int32 lane flushed every
	// step; differences ±32767.
	{"values span 32767", 0, 32767, 0, false, true},
	{"values span 32768", -1, 32767, 0, false, false},
	{"rows span 32767", 0, 32767, 0, true, true},
	{"rows span 32768", -1, 32767, 0, true, false},
	{"uint16 span 32767, shift 32768", -32768, -1, 32768, false, true},
	{"uint16 rows span 32768, shift 32768", -32768, 0, 32768, true, false},
	// Values plus shift up to ±MaxExact: pair sums of ±2¹⁸, the largest
	// offset addPairSums undoes.
	{"values up to MaxExact", 0, 32767, MaxExact - 32767, false, true},
	{"values down to −MaxExact", -32767, 0, -(MaxExact - 32767), false, true},
	{"8-bit values", 0, 255, 0, false, true},
}

// TestPairedWindowEdges: on the paired path, windows at its edges (see
// pairEdgeCases) give the exact sums of AddWindow on the same pixels as
// float64 (itself checked against AddPixels and AddShiftDifferences), bit
// for bit, and for few bands those of math/big; and the windows the paired
// path refuses go through the two passes, also bit for bit. Windows of
// even and odd widths, with and without the halo column and row, full and
// random masks.
func TestPairedWindowEdges(t *testing.T) {
	for _, p := range []int{1, 3, 12} {
		for ci, c := range pairEdgeCases {
			for _, shape := range [][4]int{{40, 9, 40, 9}, {40, 9, 41, 10}, {37, 9, 38, 9}, {37, 9, 37, 10}} {
				for _, frac := range []float64{1, 0.8} {
					rnd := rand.New(rand.NewPCG(uint64(p), uint64(ci)))
					ow, oh, w, h := shape[0], shape[1], shape[2], shape[3]
					hi := make([]bool, w*h)
					for k := range hi {
						hi[k] = rnd.IntN(2) == 1
						if c.byRow {
							hi[k] = (k/w)%2 == 1
						}
					}
					shift := make([]int32, p)
					for b := range shift {
						shift[b] = c.shift
					}
					d := tileOf(w*h, p, shift, func(k, b int) int32 { return int32([]int16{c.lo, c.hi}[b2i(hi[k])]) })
					valid := randomMask(rnd, w*h, frac)
					fwin := Window{X: d.pixels(), Valid: valid, P: p, W: w, H: h, OwnW: ow, OwnH: oh}
					iwin := Int16Window{X: d.x, Shift: d.shift, Valid: valid, P: p, W: w, H: h, OwnW: ow, OwnH: oh}
					wantM, wantN := NewExactAccumulator(p), NewExactAccumulator(p)
					AddWindow(wantM, wantN, fwin, Horizontal)
					if p <= 3 {
						checkBig(t, wantM, ownPixels(fwin), nil)
						checkBig(t, wantN, ShiftDifferences(nil, fwin, Horizontal), nil)
					}
					eachISA(func(isa ISA) {
						what := fmt.Sprintf("%v p=%d %s window %v valid %.1f", isa, p, c.name, shape, frac)
						if _, _, _, ok := newIntScratch(p).planWindow(iwin); ok != c.paired {
							t.Errorf("%s: paired path takes the window: %v, want %v", what, ok, c.paired)
						}
						gotM, gotN := NewExactAccumulator(p), NewExactAccumulator(p)
						AddInt16Window(gotM, gotN, iwin, Horizontal)
						checkSame(t, what+" pixels", gotM, wantM)
						checkSame(t, what+" differences", gotN, wantN)
					})
				}
			}
		}
	}
}

// ownPixels returns the pixels win owns, pixel-major, the invalid ones
// left out.
func ownPixels(win Window) []float64 {
	var out []float64
	for r := range win.OwnH {
		for c := range win.OwnW {
			if i := r*win.W + c; win.Valid[i] {
				out = append(out, win.X[i*win.P:(i+1)*win.P]...)
			}
		}
	}
	return out
}

// TestPairExtremes: the SIMD extremes of the paired view give the Go
// reference's (pairExtremesGo) for rows of 1 to 33 pairs around the
// 16-pair steps, with and without a column after the last pair (whose
// next difference the last slot of a row may read), values at the int16
// limits, and flags full, random and empty.
func TestPairExtremes(t *testing.T) {
	if len(simdISAs()) == 0 {
		t.Skip("no SIMD path on this CPU or build")
	}
	rnd := rand.New(rand.NewPCG(8, 8))
	for _, m := range []int{1, 15, 16, 17, 33} {
		for _, extra := range []int{0, 1} {
			for _, frac := range []float64{1, 0.6, 0} {
				p, w, rows := 3, 2*m+extra, 5
				n := w * rows
				x := make([]int16, p*n)
				for i := range x {
					x[i] = []int16{-32768, 32767, int16(rnd.Int32N(65536) - 32768)}[rnd.IntN(3)]
				}
				win := Int16Window{X: x, Valid: randomMask(rnd, n, frac), P: p, W: w, H: rows, OwnW: w, OwnH: rows}
				pr := newIntScratch(p).pairScratch()
				v := pairView{x: x, ld: n, w: w, m: m, p: p}
				v.fp, v.fn, _, _ = win.pairFlags(pr)
				got, want := make([]int32, 4*p), make([]int32, 4*p)
				pairExtremesSIMD(v, got)
				pairExtremesGo(v, want)
				if fmt.Sprint(got) != fmt.Sprint(want) {
					t.Errorf("m=%d width %d valid %.1f: extremes %v, Go %v", m, w, frac, got, want)
				}
			}
		}
	}
}

// TestLaneBound: a chunk whose lane sums of squares reach the
// Cauchy–Schwarz bound of chunk_products exactly, 2³¹ − 1 (every band
// equal, so a lane's sum of products is its sum of squares: 2·32767² +
// 362² + 5²), is summed without an int32 lane overflowing, as is one a
// unit beyond it (2³¹, where the lanes are added into int64 every step):
// the exact sums are math/big's, on each SIMD path.
func TestLaneBound(t *testing.T) {
	for _, c := range []struct {
		name   string
		values []int32
	}{
		{"squares 2³¹ − 1", []int32{32767, -32767, 362, 5}},
		{"squares 2³¹", []int32{32767, -32767, 362, 5, 1}},
	} {
		var q int64
		for _, v := range c.values {
			q += int64(v) * int64(v)
		}
		if q != 1<<31-1 && q != 1<<31 {
			t.Fatalf("%s: squares sum to %d", c.name, q)
		}
		p, n := 3, 96
		// Lane 0 of either path holds values 0 and 1 of every 32.
		lane := []int{0, 1, 32, 33, 64, 65}
		d := tileOf(n, p, nil, func(k, b int) int32 {
			for i, at := range lane {
				if k == at && i < len(c.values) {
					return c.values[i]
				}
			}
			return 0
		})
		want := NewExactAccumulator(p)
		want.AddPixels(d.pixels(), nil)
		checkBig(t, want, d.pixels(), nil)
		eachISA(func(isa ISA) {
			if isa == Scalar {
				return
			}
			got := NewExactAccumulator(p)
			got.AddInt16Tile(d.x, nil, nil)
			checkSame(t, fmt.Sprintf("%v %s", isa, c.name), got, want)
		})
	}
}
