package bands_test

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/bands"
)

// cube is a W×H image of P bands, pixel-major, with validity.
type cube struct {
	x     []float64
	valid []bool
	p     int
	w, h  int
}

func randomCube(seed uint64, p, w, h int, invalid float64) cube {
	rng := rand.New(rand.NewPCG(seed, 1))
	c := cube{x: make([]float64, p*w*h), valid: make([]bool, w*h), p: p, w: w, h: h}
	for i := range c.valid {
		c.valid[i] = rng.Float64() >= invalid
		for j := range p {
			c.x[i*p+j] = 100*float64(j) + float64(i%w) + 3*rng.NormFloat64()
		}
	}
	return c
}

// window cuts the tile at (x0, y0) of size tw×th out of c with the halo.
func (c cube) window(x0, y0, tw, th int, s bands.Shift) bands.Window {
	hc, hr := s.Halo()
	ow, oh := min(tw, c.w-x0), min(th, c.h-y0)
	ew, eh := min(ow+hc, c.w-x0), min(oh+hr, c.h-y0)
	win := bands.Window{P: c.p, W: ew, H: eh, OwnW: ow, OwnH: oh, X: make([]float64, ew*eh*c.p), Valid: make([]bool, ew*eh)}
	for r := range eh {
		for q := range ew {
			i := (y0+r)*c.w + x0 + q
			win.Valid[r*ew+q] = c.valid[i]
			copy(win.X[(r*ew+q)*c.p:], c.x[i*c.p:(i+1)*c.p])
		}
	}
	return win
}

// tiled accumulates the shift differences tile by tile with the halo,
// merged in tile order.
func (c cube) tiled(tile int, s bands.Shift) *bands.Accumulator {
	total := bands.NewAccumulator(c.p)
	for y := 0; y < c.h; y += tile {
		for x := 0; x < c.w; x += tile {
			d := bands.ShiftDifferences(nil, c.window(x, y, tile, tile, s), s)
			a := bands.NewAccumulator(c.p)
			if len(d) > 0 {
				a.AddPixels(d, nil)
			}
			total.Merge(a)
		}
	}
	return total
}

// reference is the noise covariance computed in memory with gonum's
// stat.CovarianceMatrix over the same pairs, enumerated directly on the
// whole image.
func (c cube) reference(s bands.Shift) (*mat.SymDense, int) {
	var rows []float64
	n := 0
	for r := range c.h {
		for q := range c.w {
			i := r*c.w + q
			if !c.valid[i] {
				continue
			}
			for _, nb := range []struct {
				on   bool
				ok   bool
				next int
			}{{s&bands.Horizontal != 0, q+1 < c.w, i + 1}, {s&bands.Vertical != 0, r+1 < c.h, i + c.w}} {
				if nb.on && nb.ok && c.valid[nb.next] {
					for j := range c.p {
						rows = append(rows, c.x[nb.next*c.p+j]-c.x[i*c.p+j])
					}
					n++
				}
			}
		}
	}
	cov := mat.NewSymDense(c.p, nil)
	stat.CovarianceMatrix(cov, mat.NewDense(n, c.p, rows), nil)
	cov.ScaleSym(0.5, cov)
	return cov, n
}

// TestNoiseCovarianceMatchesInMemory: the tiled shift-difference estimate
// equals gonum's stat.CovarianceMatrix of the same difference vectors,
// halved (the definition of Switzer & Green 1984 / Green et al. 1988), to
// 1e-12 relative: both are sums of the same ~10⁴ products in different
// orders, whose rounding is about n·ε ≈ 1e-12 of the largest term at worst
// and far less in practice. The pair count is exact (every pair counted
// once by the tile owning its first pixel).
func TestNoiseCovarianceMatchesInMemory(t *testing.T) {
	c := randomCube(7, 5, 67, 41, 0.1)
	for _, s := range []bands.Shift{bands.Horizontal, bands.Vertical, bands.Both} {
		want, n := c.reference(s)
		for _, tile := range []int{1, 2, 7, 16, 64, 512} {
			acc := c.tiled(tile, s)
			if acc.Count() != float64(n) {
				t.Fatalf("%v tile %d: %v pairs, want %d (enumerated directly)", s, tile, acc.Count(), n)
			}
			got := bands.NoiseCovariance(acc, nil)
			scale := math.Max(want.At(0, 0), want.At(c.p-1, c.p-1))
			for i := range c.p {
				for j := range c.p {
					if d := math.Abs(got.At(i, j) - want.At(i, j)); d > 1e-12*scale {
						t.Errorf("%v tile %d: Σ_N[%d][%d] = %v, want %v (gonum in memory)", s, tile, i, j, got.At(i, j), want.At(i, j))
					}
				}
			}
		}
	}
}

// TestShiftDifferencesOfWhiteNoise: for independent noise of variance σ²
// added to a smooth signal, ½ Cov(δ) estimates σ² (known by construction):
// with n ≈ 2·10⁵ pairs the standard error of a variance estimate is about
// σ²·√(2/n)·(a factor ≤ 2 for the correlation of overlapping pairs), so 2%
// is over 4 standard errors.
func TestShiftDifferencesOfWhiteNoise(t *testing.T) {
	const w, h, p = 400, 300, 3
	sigma := []float64{1, 3, 0.5}
	rng := rand.New(rand.NewPCG(3, 3))
	c := cube{x: make([]float64, p*w*h), valid: make([]bool, w*h), p: p, w: w, h: h}
	for r := range h {
		for q := range w {
			i := r*w + q
			c.valid[i] = true
			sig := 5 * math.Sin(float64(q)/400) * math.Cos(float64(r)/300) // gradient ≤ 0.02 per pixel: its share of ½·δ² is below 1e-3 of σ²
			for j := range p {
				c.x[i*p+j] = float64(j+1)*sig + sigma[j]*rng.NormFloat64()
			}
		}
	}
	got := bands.NoiseCovariance(c.tiled(128, bands.Both), nil)
	for j, s := range sigma {
		if v := got.At(j, j); math.Abs(v-s*s) > 0.02*s*s {
			t.Errorf("band %d: noise variance %v, want %v (constructed)", j, v, s*s)
		}
	}
}

func TestParseShift(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want bands.Shift
		ok   bool
	}{{"horizontal", bands.Horizontal, true}, {"vertical", bands.Vertical, true}, {"both", bands.Both, true}, {"diagonal", 0, false}, {"", 0, false}} {
		got, err := bands.ParseShift(tc.in)
		if (err == nil) != tc.ok || got != tc.want {
			t.Errorf("ParseShift(%q) = %v, %v", tc.in, got, err)
		}
		if tc.ok && got.String() != tc.in {
			t.Errorf("String() = %q, want %q", got.String(), tc.in)
		}
	}
}

// TestAddShiftDifferences checks that accumulating the differences straight
// from a window gives bit for bit the statistics of accumulating the vectors
// ShiftDifferences appends (known by construction: the same differences in
// the same order and chunks), for both co-moment kernels (p = 7 runs the
// fused loop under gonum's native BLAS, p = 30 Syrk), every set of pairs,
// with and without halo, and windows of more pairs than one chunk.
func TestAddShiftDifferences(t *testing.T) {
	for _, c := range []struct {
		p, w, h int
		invalid float64
	}{{7, 40, 30, 0.1}, {30, 130, 90, 0}, {30, 37, 23, 0.3}, {224, 20, 9, 0.2}} {
		cb := randomCube(uint64(c.p*c.w), c.p, c.w, c.h, c.invalid)
		for _, s := range []bands.Shift{bands.Horizontal, bands.Vertical, bands.Both} {
			for _, tile := range []int{c.w, 16} {
				win := cb.window(0, 0, tile, tile, s)
				want := bands.NewAccumulator(c.p)
				if d := bands.ShiftDifferences(nil, win, s); len(d) > 0 {
					want.AddPixels(d, nil)
				}
				got := bands.NewAccumulator(c.p)
				got.AddShiftDifferences(win, s)
				if !reflect.DeepEqual(got.State(), want.State()) {
					t.Errorf("p=%d %dx%d %v tile %d: AddShiftDifferences differs from AddPixels of ShiftDifferences", c.p, c.w, c.h, s, tile)
				}
			}
		}
	}
}

// TestExactShiftDifferences: on an integer-valued cube, exact accumulators
// of the shift differences give the same state bit for bit for every tile
// size (1 to 512) and set of pairs, equal to AddPixels of the differences of
// the whole image in one exact accumulator (the exact sums are the same
// integers, so this holds by construction), and within 1e-12 of gonum's
// in-memory covariance (as TestNoiseCovarianceMatchesInMemory). A
// non-integer value makes them ordinary (Exact false) and still correct.
func TestExactShiftDifferences(t *testing.T) {
	c := randomCube(11, 6, 71, 45, 0.1)
	for i := range c.x {
		c.x[i] = math.Round(c.x[i] * 7)
	}
	tiled := func(tile int, s bands.Shift) *bands.Accumulator {
		total := bands.NewExactAccumulator(c.p)
		for y := 0; y < c.h; y += tile {
			for x := 0; x < c.w; x += tile {
				a := bands.NewExactAccumulator(c.p)
				a.AddShiftDifferences(c.window(x, y, tile, tile, s), s)
				total.Merge(a)
			}
		}
		return total
	}
	for _, s := range []bands.Shift{bands.Horizontal, bands.Vertical, bands.Both} {
		whole := bands.NewExactAccumulator(c.p)
		whole.AddPixels(bands.ShiftDifferences(nil, c.window(0, 0, c.w, c.h, s), s), nil)
		want := whole.State()
		for _, tile := range []int{1, 2, 7, 16, 64, 512} {
			got := tiled(tile, s)
			if !got.Exact() || !reflect.DeepEqual(got.State(), want) {
				t.Errorf("%v tile %d: exact %v, state differs from the whole image's", s, tile, got.Exact())
			}
		}
		ref, _ := c.reference(s)
		got := bands.NoiseCovariance(whole, nil)
		for i := range c.p {
			for j := range c.p {
				if d := math.Abs(got.At(i, j) - ref.At(i, j)); d > 1e-12*ref.At(i, i) {
					t.Errorf("%v: Σ_N[%d][%d] = %v, want %v (gonum in memory)", s, i, j, got.At(i, j), ref.At(i, j))
				}
			}
		}
	}
	c.x[5*c.p+2] += 0.25
	ref, _ := c.reference(bands.Both)
	got := tiled(16, bands.Both)
	if got.Exact() {
		t.Error("exact with a non-integer value")
	}
	if d := math.Abs(bands.NoiseCovariance(got, nil).At(2, 2) - ref.At(2, 2)); d > 1e-12*ref.At(2, 2) {
		t.Errorf("after falling back: Σ_N[2][2] off by %v", d)
	}
}

// TestAddWindow: the paired path of AddWindow gives, bit for bit, the
// states of AddPixels of the owned pixels and AddShiftDifferences (true by
// construction: the same exact integer sums), for odd and even tile
// widths, with and without halo and invalid pixels, every set of pairs and
// both co-moment kernels; and it falls back to those two calls for
// ordinary accumulators and values beyond MaxExact/2.
func TestAddWindow(t *testing.T) {
	for _, c := range []struct {
		p, w, h int
		invalid float64
		scale   float64
	}{{7, 41, 30, 0.1, 7}, {30, 130, 90, 0, 3}, {30, 37, 23, 0.3, 11}, {224, 21, 9, 0.2, 1}, {3, 40, 20, 0, 1000}} {
		cb := randomCube(uint64(c.p*c.w+1), c.p, c.w, c.h, c.invalid)
		for i := range cb.x {
			cb.x[i] = math.Round(cb.x[i] * c.scale)
		}
		for _, s := range []bands.Shift{bands.Horizontal, bands.Vertical, bands.Both} {
			for _, tile := range []int{c.w, 16, 7} {
				mom, noise := bands.NewExactAccumulator(c.p), bands.NewExactAccumulator(c.p)
				wm, wn := bands.NewExactAccumulator(c.p), bands.NewExactAccumulator(c.p)
				for y := 0; y < c.h; y += tile {
					for x := 0; x < c.w; x += tile {
						win := cb.window(x, y, tile, tile, s)
						bands.AddWindow(mom, noise, win, s)
						own := cb.window(x, y, tile, tile, 0)
						wm.AddPixels(own.X, own.Valid)
						wn.AddShiftDifferences(win, s)
					}
				}
				// 1000·(values up to ~300) is beyond MaxExact; the
				// differences stay within it.
				if exact := c.scale < 1000; mom.Exact() != exact || !noise.Exact() {
					t.Errorf("p=%d %v tile %d: exact %v/%v, want %v/true", c.p, s, tile, mom.Exact(), noise.Exact(), exact)
				}
				if !reflect.DeepEqual(mom.State(), wm.State()) || !reflect.DeepEqual(noise.State(), wn.State()) {
					t.Errorf("p=%d %dx%d %v tile %d: AddWindow differs from AddPixels and AddShiftDifferences", c.p, c.w, c.h, s, tile)
				}
			}
		}
	}
	// Ordinary accumulators take the two calls.
	cb := randomCube(5, 4, 20, 10, 0.1)
	win := cb.window(0, 0, 20, 10, bands.Both)
	mom, noise := bands.NewAccumulator(4), bands.NewAccumulator(4)
	bands.AddWindow(mom, noise, win, bands.Both)
	wm, wn := bands.NewAccumulator(4), bands.NewAccumulator(4)
	own := cb.window(0, 0, 20, 10, 0)
	wm.AddPixels(own.X, own.Valid)
	wn.AddShiftDifferences(win, bands.Both)
	if !reflect.DeepEqual(mom.State(), wm.State()) || !reflect.DeepEqual(noise.State(), wn.State()) {
		t.Error("ordinary accumulators: AddWindow differs from AddPixels and AddShiftDifferences")
	}
}
