package figures

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot/palette"
)

// divergingStops are the anchor colours of the loadings scale at
// t = -1, -0.5, 0, 0.5, 1 of the symmetric range: deep blue through a
// warm off-white (the neutral colour at zero) to brick red.
var divergingStops = [...]color.RGBA{
	{0x1d, 0x4e, 0x89, 0xff},
	{0x86, 0xb2, 0xd4, 0xff},
	{0xf4, 0xf1, 0xea, 0xff}, // neutral
	{0xe8, 0x9c, 0x7c, 0xff},
	{0x9e, 0x24, 0x2c, 0xff},
}

// neutralColour is the colour of a zero loading.
var neutralColour = divergingStops[len(divergingStops)/2]

// diverging is a palette.ColorMap symmetric around zero: Min = -limit,
// Max = +limit and zero maps to neutralColour.
type diverging struct {
	limit float64
	alpha float64
}

var _ palette.ColorMap = (*diverging)(nil)

// newDiverging returns a diverging map over [-limit, limit]. A limit
// that is not positive and finite becomes 1 so the map stays usable.
func newDiverging(limit float64) *diverging {
	if !(limit > 0) || math.IsInf(limit, 0) {
		limit = 1
	}
	return &diverging{limit: limit, alpha: 1}
}

// At returns the colour of v; values outside ±limit are an error.
func (d *diverging) At(v float64) (color.Color, error) {
	if math.IsNaN(v) || v < -d.limit || v > d.limit {
		return nil, fmt.Errorf("figures: value %v outside ±%v", v, d.limit)
	}
	t := (v/d.limit + 1) / 2 * float64(len(divergingStops)-1) // 0..4
	i := min(int(t), len(divergingStops)-2)
	f := t - float64(i)
	a, b := divergingStops[i], divergingStops[i+1]
	mix := func(x, y uint8) uint8 {
		return uint8(math.Round(d.alpha * ((1-f)*float64(x) + f*float64(y))))
	}
	return color.RGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), uint8(math.Round(255 * d.alpha))}, nil
}

// Max returns +limit.
func (d *diverging) Max() float64 { return d.limit }

// Min returns -limit.
func (d *diverging) Min() float64 { return -d.limit }

// SetMax keeps the map symmetric: the limit becomes |v|.
func (d *diverging) SetMax(v float64) { d.limit = math.Abs(v) }

// SetMin keeps the map symmetric: the limit becomes |v|.
func (d *diverging) SetMin(v float64) { d.limit = math.Abs(v) }

// Alpha returns the opacity.
func (d *diverging) Alpha() float64 { return d.alpha }

// SetAlpha sets the opacity in [0, 1].
func (d *diverging) SetAlpha(a float64) {
	if a < 0 || a > 1 {
		panic("figures: alpha outside [0, 1]")
	}
	d.alpha = a
}

// Palette returns n colours evenly spread over [-limit, limit]. An odd
// n puts the neutral colour exactly in the middle.
func (d *diverging) Palette(n int) palette.Palette {
	cs := make([]color.Color, n)
	for i := range cs {
		v := -d.limit
		if n > 1 {
			v = -d.limit + 2*d.limit*float64(i)/float64(n-1)
		}
		v = math.Max(-d.limit, math.Min(d.limit, v)) // guard round-off
		cs[i], _ = d.At(v)
	}
	return plainPalette(cs)
}

type plainPalette []color.Color

func (p plainPalette) Colors() []color.Color { return p }
