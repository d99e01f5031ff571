package timeline

import (
	"context"
	"fmt"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/raster"
	"bandfold/tiles"
)

// stepCount is a step's mapped pixels and ground areas.
type stepCount struct {
	flagged, confirmed         int64
	flaggedArea, confirmedArea float64
	patches                    int
}

// confirmFlags keeps in each step's mask only its confirmed flags and
// applies the minimum mapping unit to them again, so that no confirmed
// patch is smaller than --min-area; each step's marks then hold its flags
// before confirmation (after the first sieve).
func (r *timelineRun) confirmFlags(ctx context.Context) error {
	var flags, marks []uint8
	for q, m := range r.masks {
		for t := range jobkit.GridFor(r.Scenes[0], r.C.Tile).Tiles() {
			if err := ctx.Err(); err != nil {
				return err
			}
			flags, marks = jobkit.Grow(flags, t.Pixels()), jobkit.Grow(marks, t.Pixels())
			if err := m.Read(t.X, t.Y, t.W, t.H, flags); err != nil {
				return err
			}
			if err := m.ReadMarks(t.X, t.Y, t.W, t.H, marks); err != nil {
				return err
			}
			for i, f := range flags {
				confirmed := marks[i] != 0
				marks[i] = 0
				if f == 1 {
					marks[i] = 1
				}
				if f == 1 && !confirmed {
					flags[i] = 0
				}
			}
			if err := m.SetMapped(t.X, t.Y, t.W, t.H, flags); err != nil {
				return err
			}
			if err := m.WriteMarks(t.X, t.Y, t.W, t.H, marks); err != nil {
				return err
			}
		}
		if err := m.SieveAgain(ctx, r.MinPixels); err != nil {
			return fmt.Errorf("sieve of the lasting changes of %s to %s: %w", r.label(q), r.label(q+1), err)
		}
	}
	return nil
}

// classify reads the maps tile by tile and writes steps.tif,
// first-change.tif, last-change.tif and change-count.tif, and counts the
// mapped pixels and areas.
func (r *timelineRun) classify(ctx context.Context) error {
	if err := r.confirmFlags(ctx); err != nil {
		return err
	}
	names, outs, err := r.createClassRasters()
	for _, o := range outs {
		defer o.Abort()
	}
	if err != nil {
		return err
	}
	S, g := r.steps(), r.Scenes[0].Grid
	r.counts = make([]stepCount, S)
	r.pw, r.ph = report.PreviewSize(g.Width, g.Height)
	r.firstPrev = make([]uint8, r.pw*r.ph)
	flags, marks := make([][]uint8, S), make([][]uint8, S)
	var ct classTile
	for t := range jobkit.GridFor(r.Scenes[0], r.C.Tile).Tiles() {
		if err := ctx.Err(); err != nil {
			return err
		}
		if err := r.readSteps(t, flags, marks); err != nil {
			return err
		}
		r.classifyTile(t, flags, marks, &ct)
		for i, buf := range [][]float64{ct.vals, ct.first, ct.last, ct.count} {
			if err := outs[i].Write(t, buf); err != nil {
				return err
			}
		}
	}
	for i, o := range outs {
		if err := o.Commit(); err != nil {
			return err
		}
		r.outputs = append(r.outputs, names[i])
	}
	return nil
}

// createClassRasters creates steps.tif, first-change.tif,
// last-change.tif and change-count.tif, returning their names and
// outputs (those created, when it fails).
func (r *timelineRun) createClassRasters() ([]string, []*raster.Output, error) {
	S, g := r.steps(), r.Scenes[0].Grid
	md := r.metadata()
	nd8, nd0, ndc := float64(StepNoData), 0.0, -1.0
	descs := make([]string, S)
	for q := range descs {
		descs[q] = fmt.Sprintf("%s to %s: 0 none, 1 flagged (did not last), 2 lasting, 255 nodata", r.label(q), r.label(q+1))
	}
	dates := r.dateClasses()
	names := []string{"steps.tif", "first-change.tif", "last-change.tif", "change-count.tif"}
	specs := []raster.Spec{
		{Grid: g, Bands: S, DataType: "Byte", NoData: &nd8, Classes: stepClasses, Descriptions: descs, Metadata: md},
		{Grid: g, Bands: 1, DataType: "Int32", NoData: &nd0, Metadata: md, Classes: dates, Descriptions: []string{"date of the first lasting change (YYYYMMDD); nodata where none"}},
		{Grid: g, Bands: 1, DataType: "Int32", NoData: &nd0, Metadata: md, Classes: dates, Descriptions: []string{"date of the last lasting change (YYYYMMDD); nodata where none"}},
		{Grid: g, Bands: 1, DataType: "Int32", NoData: &ndc, Metadata: md, Descriptions: []string{"lasting changes per pixel; nodata where no step is valid"}},
	}
	var outs []*raster.Output
	for i, spec := range specs {
		o, err := raster.Create(r.Dir.Path(names[i]), r.o.Output.Spec(spec, true))
		if err != nil {
			return nil, outs, err
		}
		outs = append(outs, o)
	}
	return names, outs, nil
}

// classTile is one tile of the class rasters: steps.tif's classes (step
// by step, pixel-major), the dates of the first and last lasting change
// and the number of lasting changes.
type classTile struct{ vals, first, last, count []float64 }

// classifyTile classifies one tile's pixels from each step's flags (the
// lasting ones, sieved again) and marks (the flags before confirmation),
// and adds them to the counts, areas and the preview of first changes.
func (r *timelineRun) classifyTile(t tiles.Tile, flags, marks [][]uint8, ct *classTile) {
	n, S := t.Pixels(), r.steps()
	ct.vals, ct.first, ct.last, ct.count = jobkit.Grow(ct.vals, n*S), jobkit.Grow(ct.first, n), jobkit.Grow(ct.last, n), jobkit.Grow(ct.count, n)
	for i := range n {
		x, y := t.X+i%t.W, t.Y+i/t.W
		cell := 0.0
		if r.Areas != nil {
			cell = r.Areas.At(x, y)
		}
		ct.first[i], ct.last[i], ct.count[i] = 0, 0, -1
		for q := range S {
			v := r.stepClass(q, flags[q][i], marks[q][i], cell)
			ct.vals[i*S+q] = v
			if v != StepNoData {
				ct.count[i] = max(ct.count[i], 0)
			}
			if v == StepConfirmed {
				date := float64(r.Dates[q+1].YYYYMMDD())
				if ct.first[i] == 0 {
					ct.first[i] = date
					r.markPreview(x, y, q+1)
				}
				ct.last[i] = date
				ct.count[i]++
			}
		}
		if ct.count[i] >= 0 {
			r.totalValid++
		}
		if ct.count[i] > 0 {
			r.totalChanged++
			r.changedArea += cell
		}
	}
}

// stepClass is steps.tif's class of a pixel at step q from its flag f
// (the lasting flags, sieved again) and its mark (flagged before
// confirmation), counted with the pixel's ground area cell.
func (r *timelineRun) stepClass(q int, f, mark uint8, cell float64) float64 {
	c := &r.counts[q]
	switch {
	case f == 255:
		return StepNoData
	case f == 1:
		c.flagged, c.confirmed, c.flaggedArea, c.confirmedArea = c.flagged+1, c.confirmed+1, c.flaggedArea+cell, c.confirmedArea+cell
		return StepConfirmed
	case mark != 0:
		c.flagged, c.flaggedArea = c.flagged+1, c.flaggedArea+cell
		return StepUnconfirmed
	default:
		return stepNone
	}
}

// readSteps reads every step's map and marks of tile t into flags and
// marks (one buffer per step, grown as needed).
func (r *timelineRun) readSteps(t tiles.Tile, flags, marks [][]uint8) error {
	n := t.Pixels()
	for q, m := range r.masks {
		flags[q], marks[q] = jobkit.Grow(flags[q], n), jobkit.Grow(marks[q], n)
		if err := m.Read(t.X, t.Y, t.W, t.H, flags[q]); err != nil {
			return err
		}
		if err := m.ReadMarks(t.X, t.Y, t.W, t.H, marks[q]); err != nil {
			return err
		}
	}
	return nil
}

// dateClasses names and colours the values of first-change.tif and
// last-change.tif, the dates of the steps' later scenes, with the colour
// ramp of first-change.png.
func (r *timelineRun) dateClasses() []raster.Class {
	colours := figures.DateColours(r.steps())
	out := make([]raster.Class, len(colours))
	for q, c := range colours {
		out[q] = raster.Class{Value: r.Dates[q+1].YYYYMMDD(), Name: r.label(q) + " to " + r.label(q+1), Colour: c}
	}
	return out
}

// markPreview records, for first-change.png, the step of a pixel's first
// confirmed change at its preview pixel (the earliest wins).
func (r *timelineRun) markPreview(x, y, step int) {
	g := r.Scenes[0].Grid
	span := func(v, full, prev int) (int, int) {
		lo := v * prev / full
		return lo, max(lo+1, min(prev, ((v+1)*prev+full-1)/full))
	}
	x0, x1 := span(x, g.Width, r.pw)
	y0, y1 := span(y, g.Height, r.ph)
	for py := y0; py < y1; py++ {
		for px := x0; px < x1; px++ {
			if v := &r.firstPrev[py*r.pw+px]; *v == 0 || int(*v) > step {
				*v = uint8(min(step, 255))
			}
		}
	}
}

// patches polygonizes each step's confirmed patches into changes.gpkg.
func (r *timelineRun) patches(context.Context) error {
	var steps []raster.PatchStep
	for q, m := range r.masks {
		steps = append(steps, raster.PatchStep{Mask: m, Band: q + 1, Date: r.Dates[q+1]})
	}
	sums, err := raster.WriteStepPatches(r.Dir.Path("changes.gpkg"), raster.PatchOptions{Magnitude: r.scratch, Metadata: r.metadata()}, steps)
	if err != nil {
		return err
	}
	for q, s := range sums {
		r.counts[q].patches = s.Count
	}
	r.outputs = append(r.outputs, "changes.gpkg")
	for q, m := range r.masks {
		if err := m.Close(); err != nil {
			return fmt.Errorf("write %s: step map: %w", r.o.Out, err)
		}
		r.masks[q] = nil
	}
	return r.removeScratch()
}
