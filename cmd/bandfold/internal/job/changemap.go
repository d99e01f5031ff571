package job

import (
	"context"
	"fmt"
	"image/color"
	"math"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// changeColors is change.tif's colour table: no change, change, nodata.
var changeColors = func() [][4]int16 {
	ct := make([][4]int16, 256)
	ct[0] = [4]int16{236, 236, 228, 255}
	ct[1] = [4]int16{214, 40, 120, 255}
	ct[255] = [4]int16{0, 0, 0, 0}
	return ct
}()

// changeMap writes change.tif from the sieved mask and counts the mapped
// change, its ground area and, with a reference, the agreement.
func (r *changeRun) changeMap(ctx context.Context) error {
	nd := 255.0
	md := r.metadata()
	md["BANDFOLD_THRESHOLD"] = r.sum.Threshold.Rule
	out, err := raster.Create(r.dir.Path("change.tif"), raster.Spec{Grid: r.before.Grid, Bands: 1, DataType: "Byte", NoData: &nd,
		ColorTable: changeColors, Descriptions: []string{"change (1), no change (0), nodata (255)"}, Metadata: md})
	if err != nil {
		return err
	}
	defer out.Abort()
	var conf change.Confusion
	sum := r.sum
	area := 0.0
	var flags, refBuf []uint8
	var vals []float64
	for t := range gridFor(r.before, r.o.Input.Tile).Tiles() {
		if err := ctx.Err(); err != nil {
			return err
		}
		n := t.Pixels()
		flags, refBuf, vals = grow(flags, n), grow(refBuf, n), grow(vals, n)
		if err := r.mask.Read(t.X, t.Y, t.W, t.H, flags); err != nil {
			return err
		}
		if r.ref != nil {
			if err := r.ref.Read(t.X, t.Y, t.W, t.H, refBuf); err != nil {
				return err
			}
		}
		for i, f := range flags {
			vals[i] = float64(f)
			if f == 255 {
				continue
			}
			sum.ValidPixels++
			if f == 1 {
				sum.ChangedPixels++
				if r.areas != nil {
					area += r.areas.At(t.X+i%t.W, t.Y+i/t.W)
				}
			}
			if r.ref != nil && refBuf[i] != 255 {
				conf.Add(f == 1, refBuf[i] == 1)
			}
		}
		if err := out.Write(t, vals); err != nil {
			return err
		}
	}
	if err := out.Commit(); err != nil {
		return err
	}
	if sum.ValidPixels > 0 {
		sum.ChangedFrac = float64(sum.ChangedPixels) / float64(sum.ValidPixels)
	}
	if r.areas != nil {
		ha := area / 1e4
		sum.ChangedAreaM2, sum.ChangedAreaHa = &area, &ha
	}
	if r.ref != nil {
		sum.Reference = &ChangeAccuracy{File: r.o.Reference, Confusion: conf, Rates: conf.Rates()}
	}
	return nil
}

// previewColor outlines change patches: a saturated magenta that stands out
// on natural colours.
var previewColor = color.RGBA{255, 0, 200, 255}

// preview writes preview.png: the after date as a composite with the mapped
// change outlined, a legend, a scale bar and the changed area.
func (r *changeRun) preview(context.Context) error {
	after := r.after
	img, err := composite(after, r.rgb)
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
		buf = grow(buf, t.Pixels())
		if err := r.mask.Read(t.X, t.Y, t.W, t.H, buf); err != nil {
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
	if r.areas != nil {
		metres = math.Sqrt(r.areas.Mean())
	}
	text := fmt.Sprintf("mapped change: %d pixels", r.sum.ChangedPixels)
	if r.sum.ChangedAreaHa != nil {
		text = fmt.Sprintf("mapped area of change: %.1f ha (screening result, verify before acting)", *r.sum.ChangedAreaHa)
	}
	ann := figures.Annotation{Swatch: previewColor, SwatchLabel: "mapped change", Text: text}
	if r.areas != nil || after.HasGeoTransform {
		ann.MetresPerPixel = metres * sx
	}
	data, err := encodePNG(figures.Annotate(img, ann))
	if err != nil {
		return fmt.Errorf("preview of %s: %w", r.o.Out, err)
	}
	if err := output.WriteFile(r.dir.Path("preview.png"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "preview.png")
	return nil
}
