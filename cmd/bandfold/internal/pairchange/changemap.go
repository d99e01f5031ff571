package pairchange

import (
	"context"
	"image/color"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/transform/change"
)

// changeClasses are the names and colours of change.tif's values.
var changeClasses = []raster.Class{
	{Value: 0, Name: "no change", Colour: figures.MapBackground},
	{Value: 1, Name: "change", Colour: color.RGBA{214, 40, 120, 255}},
	{Value: 255, Name: "nodata"},
}

// changeMap writes change.tif from the sieved mask and counts the mapped
// change, its ground area and, with a reference, the agreement.
func (r *changeRun) changeMap(ctx context.Context) error {
	nd := 255.0
	md := r.metadata()
	out, err := raster.Create(r.Dir.Path("change.tif"), r.o.Output.Spec(raster.Spec{Grid: r.before.Grid, Bands: 1, DataType: "Byte", NoData: &nd,
		Classes: changeClasses, Descriptions: []string{"change (1), no change (0), nodata (255)"}, Metadata: md}, true))
	if err != nil {
		return err
	}
	defer out.Abort()
	var conf change.Confusion
	sum := r.sum
	area, validArea := 0.0, 0.0
	var flags, refBuf []uint8
	var vals []float64
	r.marks = newPreviewMarks(r.before.Width, r.before.Height)
	for t := range jobkit.GridFor(r.before, r.o.Input.Tile).Tiles() {
		if err := ctx.Err(); err != nil {
			return err
		}
		n := t.Pixels()
		flags, refBuf, vals = jobkit.Grow(flags, n), jobkit.Grow(refBuf, n), jobkit.Grow(vals, n)
		if err := r.mask.Read(t.X, t.Y, t.W, t.H, flags); err != nil {
			return err
		}
		if r.ref != nil {
			if err := r.ref.Read(t.X, t.Y, t.W, t.H, refBuf); err != nil {
				return err
			}
		}
		for row := range t.H {
			var cells []float64 // the row's areas by block of columns
			width := 1
			if r.Areas != nil {
				cells, width = r.Areas.Row(t.Y + row)
			}
			for c := range t.W {
				i := row*t.W + c
				f := flags[i]
				vals[i] = float64(f)
				if f == 255 {
					continue
				}
				sum.ValidPixels++
				cell := 0.0
				if cells != nil {
					cell = cells[(t.X+c)/width]
					validArea += cell
				}
				if f == 1 {
					sum.ChangedPixels++
					area += cell
					r.marks.mark(t.X+c, t.Y+row)
				}
				if r.ref != nil && refBuf[i] != 255 {
					conf.Add(f == 1, refBuf[i] == 1)
				}
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
	sum.SetChangedArea(r.Run, area)
	if r.Areas != nil {
		sum.ValidAreaM2, sum.ValidAreaHa = jobkit.Ptr(validArea), jobkit.Ptr(validArea/1e4)
	}
	if r.ref != nil {
		sum.Reference = &changefolder.ChangeAccuracy{File: sum.Paths.Input(r.o.Reference), Confusion: conf, Rates: conf.Rates()}
	}
	return nil
}
