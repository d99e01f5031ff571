package figures

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"slices"
)

// isValid reports whether pixel i counts: valid may be nil (all
// pixels count), and NaN never does.
func isValid(values []float64, valid []bool, i int) bool {
	return (valid == nil || valid[i]) && !math.IsNaN(values[i])
}

// Percentiles returns the exact percentiles ps (in percent, clamped to
// 0..100) of the valid values, interpolating linearly between the
// closest ranks: with n sorted values, percentile q lies at rank
// (n-1)·q/100. valid may be nil (every value counts); NaN values never
// count. With no valid values every result is NaN. The slice is not
// modified; the caller decimates large rasters first.
func Percentiles(values []float64, valid []bool, ps ...float64) []float64 {
	mustMatch("valid", len(valid), len(values), valid == nil)
	sorted := make([]float64, 0, len(values))
	for i, v := range values {
		if isValid(values, valid, i) {
			sorted = append(sorted, v)
		}
	}
	slices.Sort(sorted)
	out := make([]float64, len(ps))
	for j, q := range ps {
		if len(sorted) == 0 {
			out[j] = math.NaN()
			continue
		}
		rank := float64(len(sorted)-1) * math.Max(0, math.Min(100, q)) / 100
		lo := int(rank)
		hi := min(lo+1, len(sorted)-1)
		f := rank - float64(lo)
		out[j] = sorted[lo] + f*(sorted[hi]-sorted[lo])
	}
	return out
}

// Stretch maps values linearly so lo becomes 0 and hi becomes 255,
// clipping outside [lo, hi] and rounding to the nearest level. Invalid
// and NaN values become 0. When hi <= lo the stretch is a step: values
// below lo become 0 and the rest 255. A NaN limit (no valid pixels
// to take percentiles from) gives all zeros. valid may be nil.
func Stretch(values []float64, valid []bool, lo, hi float64) []uint8 {
	mustMatch("valid", len(valid), len(values), valid == nil)
	out := make([]uint8, len(values))
	if math.IsNaN(lo) || math.IsNaN(hi) {
		return out
	}
	for i, v := range values {
		switch {
		case !isValid(values, valid, i), v < lo:
			out[i] = 0
		case v >= hi:
			out[i] = 255
		default: // lo <= v < hi, so hi > lo
			out[i] = uint8(math.Round((v - lo) / (hi - lo) * 255))
		}
	}
	return out
}

// RGB composes a w×h image from three 8-bit channels in row-major
// order. Invalid pixels (valid[i] false) are dark grey; valid may be
// nil. It panics if a slice does not hold w·h pixels.
func RGB(w, h int, r, g, b []uint8, valid []bool) *image.RGBA {
	n := w * h
	mustMatch("red", len(r), n, false)
	mustMatch("green", len(g), n, false)
	mustMatch("blue", len(b), n, false)
	mustMatch("valid", len(valid), n, valid == nil)
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for i := range n {
		c := invalidColour
		if valid == nil || valid[i] {
			c = color.RGBA{r[i], g[i], b[i], 0xff}
		}
		o := 4 * i // Stride is 4·w for a fresh image
		img.Pix[o], img.Pix[o+1], img.Pix[o+2], img.Pix[o+3] = c.R, c.G, c.B, c.A
	}
	return img
}

// Outline paints, in colour c, the boundary pixels of the patches of
// mask: pixels in the mask with at least one 4-neighbour outside it.
// Pixels beyond the image edge count as outside, so patches touching
// the edge are closed. mask is row-major over img's bounds; Outline
// panics if its length differs.
func Outline(img *image.RGBA, mask []bool, c color.RGBA) { OutlineWidth(img, mask, c, 1) }

// OutlineWidth is Outline with a boundary width pixels wide: pixels in the
// mask within width 4-neighbour steps of a pixel outside it. It panics if
// width < 1.
func OutlineWidth(img *image.RGBA, mask []bool, c color.RGBA, width int) {
	if width < 1 {
		panic(fmt.Sprintf("figures: outline width %d", width))
	}
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	mustMatch("mask", len(mask), w*h, false)
	in := func(x, y int) bool {
		return x >= 0 && y >= 0 && x < w && y < h && mask[y*w+x]
	}
	edge := func(x, y int) bool {
		for dy := -width; dy <= width; dy++ {
			for dx := -width; dx <= width; dx++ {
				if abs(dx)+abs(dy) <= width && !in(x+dx, y+dy) {
					return true
				}
			}
		}
		return false
	}
	for y := range h {
		for x := range w {
			if in(x, y) && edge(x, y) {
				img.SetRGBA(b.Min.X+x, b.Min.Y+y, c)
			}
		}
	}
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// mustMatch panics when a slice length is not the expected one, unless
// the slice is optional and absent.
func mustMatch(name string, got, want int, optionalAbsent bool) {
	if !optionalAbsent && got != want {
		panic(fmt.Sprintf("figures: %s has %d pixels, want %d", name, got, want))
	}
}
