package figures

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"testing"
)

func TestPercentilesHandWorked(t *testing.T) {
	// 0..100 shuffled: percentile q is exactly q.
	vals := make([]float64, 101)
	for i := range vals {
		vals[i] = float64((i * 37) % 101)
	}
	got := Percentiles(vals, nil, 0, 2, 50, 98, 100, -5, 120)
	want := []float64{0, 2, 50, 98, 100, 0, 100}
	for i := range want {
		if !near(got[i], want[i]) {
			t.Errorf("p%v = %v, want %v", []float64{0, 2, 50, 98, 100, -5, 120}[i], got[i], want[i])
		}
	}
	if vals[1] != 37 {
		t.Error("input reordered")
	}
}

func TestPercentilesInterpolatesAndMasks(t *testing.T) {
	// Valid values 10, 20, 30, 40 (n = 4): rank of q is 3q/100.
	vals := []float64{40, 999, 10, math.NaN(), 30, 20}
	valid := []bool{true, false, true, true, true, true}
	got := Percentiles(vals, valid, 50, 25, 90)
	want := []float64{25, 17.5, 37}
	for i := range want {
		if !near(got[i], want[i]) {
			t.Errorf("got %v, want %v", got, want)
			break
		}
	}
	none := Percentiles([]float64{1, 2}, []bool{false, false}, 50)
	if !math.IsNaN(none[0]) {
		t.Errorf("no valid values: %v, want NaN", none[0])
	}
}

func TestStretch(t *testing.T) {
	vals := []float64{-5, 0, 25, 50, 100, 200, math.NaN(), 50}
	valid := []bool{true, true, true, true, true, true, true, false}
	got := Stretch(vals, valid, 0, 100)
	// 25 → 63.75 → 64; 50 → 127.5 → 128 (round half away from zero).
	want := []uint8{0, 0, 64, 128, 255, 255, 0, 0}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("got %v, want %v", got, want)
	}
	step := Stretch([]float64{1, 2, 3}, nil, 2, 2)
	if fmt.Sprint(step) != "[0 255 255]" {
		t.Errorf("hi == lo: %v", step)
	}
	if s := Stretch([]float64{1}, nil, math.NaN(), 2); s[0] != 0 {
		t.Errorf("NaN limit: %v", s)
	}
}

func TestRGB(t *testing.T) {
	img := RGB(2, 1, []uint8{10, 20}, []uint8{30, 40}, []uint8{50, 60}, []bool{true, false})
	if got := img.RGBAAt(0, 0); got != (color.RGBA{10, 30, 50, 255}) {
		t.Errorf("pixel 0: %v", got)
	}
	if got := img.RGBAAt(1, 0); got != invalidColour {
		t.Errorf("invalid pixel: %v, want %v", got, invalidColour)
	}
	defer func() {
		if recover() == nil {
			t.Error("short channel did not panic")
		}
	}()
	RGB(2, 2, []uint8{1}, nil, nil, nil)
}

func TestOutlineSquare(t *testing.T) {
	// A 4×4 square at (2..5, 1..4) in an 8×6 image: its boundary is the
	// 12-pixel ring; the 2×2 core and everything outside stay put.
	const w, h = 8, 6
	mask := make([]bool, w*h)
	for y := 1; y <= 4; y++ {
		for x := 2; x <= 5; x++ {
			mask[y*w+x] = true
		}
	}
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	red := color.RGBA{255, 0, 0, 255}
	Outline(img, mask, red)
	ring := 0
	for y := range h {
		for x := range w {
			inSquare := x >= 2 && x <= 5 && y >= 1 && y <= 4
			core := x >= 3 && x <= 4 && y >= 2 && y <= 3
			want := inSquare && !core
			if got := img.RGBAAt(x, y) == red; got != want {
				t.Errorf("(%d,%d): outlined %v, want %v", x, y, got, want)
			}
			if want {
				ring++
			}
		}
	}
	if ring != 12 {
		t.Fatalf("ring has %d pixels, want 12", ring)
	}
}

func TestOutlineImageEdge(t *testing.T) {
	// A full mask: only the image border is boundary.
	mask := make([]bool, 9)
	for i := range mask {
		mask[i] = true
	}
	img := image.NewRGBA(image.Rect(0, 0, 3, 3))
	Outline(img, mask, color.RGBA{0, 0, 255, 255})
	if img.RGBAAt(1, 1).A != 0 || img.RGBAAt(0, 1).B != 255 || img.RGBAAt(2, 2).B != 255 {
		t.Error("full mask: want a 1-pixel frame and an untouched centre")
	}
}

// TestOutlineWidth: a 6 x 6 square's boundary of width 1 is its 20 edge
// pixels and of width 2 all but its central 2 x 2 (32), by hand.
func TestOutlineWidth(t *testing.T) {
	for _, tc := range []struct{ width, want int }{{1, 20}, {2, 32}, {3, 36}} {
		img := image.NewRGBA(image.Rect(0, 0, 10, 10))
		mask := make([]bool, 100)
		for y := 2; y < 8; y++ {
			for x := 2; x < 8; x++ {
				mask[y*10+x] = true
			}
		}
		c := color.RGBA{255, 0, 200, 255}
		OutlineWidth(img, mask, c, tc.width)
		n := 0
		for i := range 100 {
			if img.RGBAAt(i%10, i/10) == c {
				n++
			}
		}
		if n != tc.want {
			t.Errorf("width %d: %d outline pixels, want %d", tc.width, n, tc.want)
		}
	}
}
