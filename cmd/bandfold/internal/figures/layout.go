package figures

import (
	"fmt"
	"image"
	"math"
	"strings"

	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/vgimg"
)

// TextBox is where a figure drew one piece of text: the box of its line
// (from the font's descent below the baseline to its ascent above, as
// wide as the plot library measures the string), in pixels of the image
// with the origin at the top left, and its typeface ("Liberation Sans").
type TextBox struct {
	Text string
	Box  image.Rectangle
	Font string
}

// Layout is a drawn figure with the boxes of all its text, so that a test
// can check that no text overlaps other text or leaves the image.
type Layout struct {
	Image *image.RGBA
	Text  []TextBox
}

// Overlaps describes each pair of text boxes that overlap and each box
// not wholly inside the image, one line each; nil when there is none.
// Boxes that only touch do not overlap.
func (l Layout) Overlaps() []string {
	var out []string
	bounds := l.Image.Bounds()
	for i, a := range l.Text {
		if !a.Box.In(bounds) {
			out = append(out, fmt.Sprintf("%q at %v leaves the %v image", a.Text, a.Box, bounds.Size()))
		}
		for _, b := range l.Text[i+1:] {
			if a.Box.Overlaps(b.Box) {
				out = append(out, fmt.Sprintf("%q at %v overlaps %q at %v", a.Text, a.Box, b.Text, b.Box))
			}
		}
	}
	return out
}

// shifted returns the boxes moved by d.
func shifted(boxes []TextBox, d image.Point) []TextBox {
	out := make([]TextBox, len(boxes))
	for i, b := range boxes {
		out[i] = TextBox{b.Text, b.Box.Add(d), b.Font}
	}
	return out
}

// affine is the transform of a vg canvas: (x, y) goes to
// (a x + b y + c, d x + e y + f), in vg units with y up.
type affine struct{ a, b, c, d, e, f float64 }

var identity = affine{a: 1, e: 1}

func (m affine) apply(x, y float64) (float64, float64) {
	return m.a*x + m.b*y + m.c, m.d*x + m.e*y + m.f
}

func (m affine) translate(x, y float64) affine {
	m.c, m.f = m.a*x+m.b*y+m.c, m.d*x+m.e*y+m.f
	return m
}

func (m affine) rotate(t float64) affine {
	sin, cos := math.Sincos(t)
	return affine{m.a*cos + m.b*sin, -m.a*sin + m.b*cos, m.c, m.d*cos + m.e*sin, -m.d*sin + m.e*cos, m.f}
}

func (m affine) scale(x, y float64) affine {
	m.a, m.b, m.d, m.e = m.a*x, m.b*y, m.d*x, m.e*y
	return m
}

// recorder is a vgimg canvas that records the box of every string drawn
// on it, following the canvas's transforms as vg defines them.
type recorder struct {
	*vgimg.Canvas
	m     affine
	stack []affine
	text  []TextBox
}

// newRecorder returns a recording canvas drawing on c.
func newRecorder(c *vgimg.Canvas) *recorder {
	return &recorder{Canvas: c, m: identity}
}

func (r *recorder) Translate(pt vg.Point) {
	r.m = r.m.translate(float64(pt.X), float64(pt.Y))
	r.Canvas.Translate(pt)
}

func (r *recorder) Rotate(t float64) {
	r.m = r.m.rotate(t)
	r.Canvas.Rotate(t)
}

func (r *recorder) Scale(x, y float64) {
	r.m = r.m.scale(x, y)
	r.Canvas.Scale(x, y)
}

func (r *recorder) Push() {
	r.stack = append(r.stack, r.m)
	r.Canvas.Push()
}

func (r *recorder) Pop() {
	r.m, r.stack = r.stack[len(r.stack)-1], r.stack[:len(r.stack)-1]
	r.Canvas.Pop()
}

// FillString draws text and records its box.
func (r *recorder) FillString(f font.Face, pt vg.Point, text string) {
	r.Canvas.FillString(f, pt, text)
	if f.Font.Size == 0 || strings.TrimSpace(text) == "" {
		return
	}
	e := f.Extents()
	x0, x1 := float64(pt.X), float64(pt.X+f.Width(text))
	y0, y1 := float64(pt.Y-e.Descent), float64(pt.Y+e.Ascent)
	_, h := r.Size()
	toPx := r.DPI() / 72
	box := image.Rectangle{Min: image.Pt(math.MaxInt32, math.MaxInt32), Max: image.Pt(math.MinInt32, math.MinInt32)}
	for _, c := range [][2]float64{{x0, y0}, {x1, y0}, {x0, y1}, {x1, y1}} {
		x, y := r.m.apply(c[0], c[1])
		px, py := x*toPx, (float64(h)-y)*toPx
		box.Min = image.Pt(min(box.Min.X, int(math.Floor(px))), min(box.Min.Y, int(math.Floor(py))))
		box.Max = image.Pt(max(box.Max.X, int(math.Ceil(px))), max(box.Max.Y, int(math.Ceil(py))))
	}
	r.text = append(r.text, TextBox{text, box, strings.TrimSpace(string(f.Font.Typeface) + " " + string(f.Font.Variant))})
}

// layout returns the recorded canvas's image and text.
func (r *recorder) layout() Layout {
	img, ok := r.Image().(*image.RGBA)
	if !ok {
		b := r.Image().Bounds()
		img = image.NewRGBA(b)
		for y := b.Min.Y; y < b.Max.Y; y++ {
			for x := b.Min.X; x < b.Max.X; x++ {
				img.Set(x, y, r.Image().At(x, y))
			}
		}
	}
	return Layout{Image: img, Text: r.text}
}
