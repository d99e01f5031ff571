package pairchange

import (
	"context"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"math"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/raster/output"
)

// previewColor outlines change patches: a saturated magenta that stands out
// on natural colours.
var previewColor = color.RGBA{255, 0, 200, 255}

// Preview geometry: the outline width and the gap between the panels, in
// pixels.
const (
	outlineWidth = 2
	PanelGap     = 8
)

// NaturalColour picks the preview bands: red, green and blue when AFTER's
// (or BEFORE's) band descriptions or wavelengths say which those are, else
// the first three with a note when the preview is drawn.
func (r *changeRun) naturalColour() {
	if rgb, ok := report.NaturalColour(r.after); ok {
		r.rgb = rgb
		return
	}
	if rgb, ok := report.NaturalColour(r.before); ok {
		r.rgb = rgb
		return
	}
	r.rgbNote = true
}

// previewMarks marks, at the preview size pw x ph, the preview pixels
// over which any full-resolution pixel of a w x h map is mapped as changed.
type previewMarks struct {
	pw, ph  int
	sx, sy  float64
	changed []bool
}

func newPreviewMarks(w, h int) *previewMarks {
	pw, ph := report.PreviewSize(w, h)
	return &previewMarks{pw: pw, ph: ph, sx: float64(pw) / float64(w), sy: float64(ph) / float64(h), changed: make([]bool, pw*ph)}
}

// mark marks the preview pixels over full-resolution pixel (x, y).
func (m *previewMarks) mark(x, y int) {
	x0, x1 := int(float64(x)*m.sx), max(int(float64(x)*m.sx)+1, int(math.Ceil(float64(x+1)*m.sx)))
	y0, y1 := int(float64(y)*m.sy), max(int(float64(y)*m.sy)+1, int(math.Ceil(float64(y+1)*m.sy)))
	for py := y0; py < min(y1, m.ph); py++ {
		for px := x0; px < min(x1, m.pw); px++ {
			m.changed[py*m.pw+px] = true
		}
	}
}

// preview writes preview.png: BEFORE and AFTER side by side as composites
// with the mapped change outlined on both, a title, both dates, a legend, a
// north arrow and a scale bar when the grid has a CRS, the changed area and
// the full caution.
func (r *changeRun) preview(context.Context) error {
	if r.rgbNote {
		r.Env.Warn("preview.png shows bands %d, %d, %d as red, green, blue: the bands of %s do not say which are natural colours (choose with --preview-bands)",
			r.rgb[0]+1, r.rgb[1]+1, r.rgb[2]+1, r.o.After)
	}
	pw, ph := report.PreviewSize(r.before.Width, r.before.Height)
	changed := r.marks.changed
	// The full-resolution map (3 bytes a pixel) is spent: release it before
	// the figure is built, which is the peak of memory otherwise (on two
	// 8192 x 8192 scenes, 505-508 MiB with it held, against 512 allowed).
	if err := r.mask.Close(); err != nil {
		return err
	}
	r.mask = nil
	before, after, err := r.composites()
	if err != nil {
		return err
	}
	figures.OutlineWidth(before, changed, previewColor, outlineWidth)
	figures.OutlineWidth(after, changed, previewColor, outlineWidth)
	img := image.NewRGBA(image.Rect(0, 0, 2*pw+PanelGap, ph))
	draw.Draw(img, img.Bounds(), image.NewUniform(color.White), image.Point{}, draw.Src)
	draw.Draw(img, image.Rect(0, 0, pw, ph), before, image.Point{}, draw.Src)
	draw.Draw(img, image.Rect(pw+PanelGap, 0, 2*pw+PanelGap, ph), after, image.Point{}, draw.Src)

	bl, al := r.NameIn(0), r.NameIn(1)
	text := fmt.Sprintf("mapped change: %s of %s valid pixels", jobkit.Count(r.sum.ChangedPixels), jobkit.Count(r.sum.ValidPixels))
	if r.sum.ChangedAreaHa != nil {
		text = fmt.Sprintf("mapped area of change: %.1f ha of %.1f ha valid", *r.sum.ChangedAreaHa, *r.sum.ValidAreaHa)
	}
	ann := figures.Annotation{Swatch: previewColor, SwatchLabel: "mapped change (outlined on both dates)", Text: text,
		Title: fmt.Sprintf("Change map: left BEFORE %s, right AFTER %s", bl, al),
		Lines: []string{fmt.Sprintf("bands %d, %d, %d as red, green, blue; threshold %s (Z = %.4g, k = %d); minimum mapping unit %d px",
			r.rgb[0]+1, r.rgb[1]+1, r.rgb[2]+1, r.o.Threshold, r.zcut, r.Proj.Components(), r.MinPixels), jobkit.Caution}}
	if v, ok := r.before.Metadata["SCENARIO"]; ok {
		ann.Lines = append(ann.Lines, "invented scenario: "+v)
	}
	gt := r.before.GeoTransform
	if r.Areas != nil {
		// One preview pixel covers w / pw image pixels.
		ann.MetresPerPixel = math.Sqrt(r.Areas.Mean()) * float64(r.before.Width) / float64(pw)
		ann.NorthArrow = gt[2] == 0 && gt[4] == 0
	}
	data, err := report.EncodePNG(figures.Annotate(img, ann))
	if err != nil {
		return fmt.Errorf("preview of %s: %w", r.o.Out, err)
	}
	if err := output.WriteFile(r.Dir.Path("preview.png"), data, false); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "preview.png")
	return nil
}

// composites returns both dates' previews: gathered during the map pass
// when the preview reduces the images, else read again (small images).
func (r *changeRun) composites() (before, after *image.RGBA, err error) {
	if r.grid != nil {
		return r.grid.Image(0), r.grid.Image(1), nil
	}
	if before, err = report.Composite(r.before, r.rgb); err != nil {
		return nil, nil, err
	}
	after, err = report.Composite(r.after, r.rgb)
	return before, after, err
}
