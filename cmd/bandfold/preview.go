package main

import (
	"fmt"
	"image"
	"image/color"
	"math"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/raster"
	"bandfold/tiles"
)

// previewSide is the longest side of a quicklook, in pixels.
const previewSide = 1024

// previewSize scales w x h down to fit previewSide.
func previewSize(w, h int) (int, int) {
	f := math.Max(1, float64(max(w, h))/previewSide)
	return max(1, int(math.Round(float64(w)/f))), max(1, int(math.Round(float64(h)/f)))
}

// composite reads three bands of s (0-based positions) decimated to the
// preview size and stretches each from its 2nd to its 98th percentile.
func composite(s *raster.Stack, rgb [3]int) (*image.RGBA, []bool, error) {
	sub, err := s.Subset(rgb[:])
	if err != nil {
		return nil, nil, err
	}
	r, err := sub.NewReader()
	if err != nil {
		return nil, nil, err
	}
	defer r.Close()
	pw, ph := previewSize(s.Width, s.Height)
	vals := make([]float64, pw*ph*3)
	valid := make([]bool, pw*ph)
	if _, err := r.ReadScaled(tiles.Tile{W: s.Width, H: s.Height}, pw, ph, vals, valid); err != nil {
		return nil, nil, err
	}
	var ch [3][]uint8
	band := make([]float64, pw*ph)
	for c := range 3 {
		for i := range band {
			band[i] = vals[i*3+c]
		}
		lim := figures.Percentiles(band, valid, 2, 98)
		ch[c] = figures.Stretch(band, valid, lim[0], lim[1])
	}
	return figures.RGB(pw, ph, ch[0], ch[1], ch[2], valid), valid, nil
}

// parsePreviewBands reads --preview-bands: three 1-based band numbers of an
// image with p bands; empty means the first three (or the first band
// three times for fewer bands).
func parsePreviewBands(spec string, p int) ([3]int, error) {
	if spec == "" {
		return [3]int{0, min(1, p-1), min(2, p-1)}, nil
	}
	sel, err := raster.ParseBands(spec)
	if err != nil || len(sel) != 3 {
		return [3]int{}, usagef("--preview-bands %q: want three band numbers such as 3,2,1", spec)
	}
	var out [3]int
	for i, b := range sel {
		if b > p {
			return out, usagef("--preview-bands %q: band %d out of range (the image has %d bands)", spec, b, p)
		}
		out[i] = b - 1
	}
	return out, nil
}

// previewColor outlines change patches: a saturated magenta that stands out
// on natural colours.
var previewColor = color.RGBA{255, 0, 200, 255}

// writeChangePreview writes preview.png: the after date as a composite with
// the mapped change outlined, a legend, a scale bar and the changed area.
func writeChangePreview(g *globals, o *changeOptions, dir *outDir, mask *raster.ChangeMask, after *raster.Stack, areas *raster.CellAreas, sum *changeSummary) error {
	rgb, err := parsePreviewBands(o.previewBands, after.Len())
	if err != nil {
		return err
	}
	img, _, err := composite(after, rgb)
	if err != nil {
		return err
	}
	pw, ph := img.Bounds().Dx(), img.Bounds().Dy()
	// A preview pixel is marked changed when any full-resolution pixel
	// under it is.
	changed := make([]bool, pw*ph)
	sx, sy := float64(after.Width)/float64(pw), float64(after.Height)/float64(ph)
	tg := tiles.NewGrid(after.Width, after.Height, after.Width, max(1, min(after.Height, 256)))
	var buf []uint8
	for t := range tg.Tiles() {
		if cap(buf) < t.Pixels() {
			buf = make([]uint8, t.Pixels())
		}
		buf = buf[:t.Pixels()]
		if err := mask.Read(t.X, t.Y, t.W, t.H, buf); err != nil {
			return err
		}
		for i, f := range buf {
			if f == 1 {
				x, y := int(float64(t.X+i%t.W)/sx), int(float64(t.Y+i/t.W)/sy)
				changed[min(y, ph-1)*pw+min(x, pw-1)] = true
			}
		}
	}
	figures.Outline(img, changed, previewColor)
	metres := math.Abs(after.GeoTransform[1])
	if areas != nil {
		metres = math.Sqrt(areas.Mean())
	}
	text := fmt.Sprintf("mapped change: %d pixels", sum.ChangedPixels)
	if sum.ChangedAreaHa != nil {
		text = fmt.Sprintf("mapped area of change: %.1f ha (screening result, verify before acting)", *sum.ChangedAreaHa)
	}
	ann := figures.Annotation{Swatch: previewColor, SwatchLabel: "mapped change", Text: text}
	if areas != nil || after.HasGeoTransform {
		ann.MetresPerPixel = metres * sx
	}
	return figures.WritePNG(dir.path("preview.png"), figures.Annotate(img, ann))
}
