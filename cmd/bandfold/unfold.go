package main

import (
	"context"
	"fmt"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"

	"github.com/spf13/cobra"

	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

type unfoldOptions struct {
	input       inputFlags // apply to the --compare image
	basis       string
	out         string
	dtype       string
	compare     string
	format      string
	co          []string
	overwrite   bool
	ignoreBasis bool
}

func newUnfoldCommand(g *globals) *cobra.Command {
	o := &unfoldOptions{}
	cmd := &cobra.Command{
		Use:   "unfold COMPONENTS --basis BASIS.json --out RESTORED.tif",
		Short: "Reconstruct the bands from component images, and measure the loss",
		Long: `unfold rebuilds every band from the component scores, x = mean + s (W_k y),
and writes them in the original bands' type (rounded and clamped to its
range), or as float32/float64.

With --compare ORIGINAL (same grid and bands; --bands, --nodata and --mask
apply to it) it reports the loss: RMSE overall and per band, on the
unrounded reconstruction and on the values written, PSNR per band (peak =
max - min of the original's valid values), the mean spectral angle, the
largest absolute error, and the compression ratio against a lossless DEFLATE
copy of the original.`,
		Example: `  bandfold unfold cube.components.tif --basis cube.basis.json --out cube.restored.tif --compare cube.tif
  bandfold unfold cube.components.tif --basis cube.basis.json --out restored.tif --type float32 --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runUnfold(cmd.Context(), g, o, args[0])
		},
	}
	f := cmd.Flags()
	o.input.register(f)
	f.StringVarP(&o.basis, "basis", "b", "", "basis file the components were folded with")
	f.StringVarP(&o.out, "out", "o", "", "restored image to write")
	f.StringVar(&o.dtype, "type", "same", "same (the original bands' type), float32 or float64")
	f.StringVar(&o.compare, "compare", "", "original image to measure the loss against")
	f.StringVar(&o.format, "format", "gtiff", "gtiff or cog")
	f.StringArrayVar(&o.co, "co", nil, "GDAL creation option KEY=VALUE (repeatable)")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace an existing output")
	f.BoolVar(&o.ignoreBasis, "ignore-basis-mismatch", false, "unfold even when the components record another basis")
	cmd.MarkFlagRequired("basis")
	cmd.MarkFlagRequired("out")
	return cmd
}

// unfoldSummary is the JSON summary of unfold.
type unfoldSummary struct {
	Output     string `json:"output"`
	Components int    `json:"components"`
	Bands      int    `json:"bands"`
	Type       string `json:"type"`
	Pixels     int64  `json:"pixels"`
	*transform.LossReport
	RMSEWritten          *float64 `json:"rmse_written,omitempty"`
	CompressionRatio     *float64 `json:"compression_ratio,omitempty"`
	OriginalDeflateBytes int64    `json:"original_deflate_bytes,omitempty"`
	ComponentsBytes      int64    `json:"components_bytes,omitempty"`
	BasisBytes           int64    `json:"basis_bytes,omitempty"`
}

// storage describes how reconstructed values are stored: the GDAL type, its
// range for integer types, the nodata value and per-band scale/offset.
type storage struct {
	dtype      string
	integer    bool
	lo, hi     float64
	nodata     float64
	scale, off []float64
}

var integerRanges = map[string][2]float64{
	"Byte": {0, 255}, "UInt16": {0, 65535}, "Int16": {-32768, 32767},
	"UInt32": {0, 4294967295}, "Int32": {-2147483648, 2147483647},
}

func newStorage(b *transform.Basis, kind string) (storage, error) {
	st := storage{}
	switch strings.ToLower(kind) {
	case "float32":
		st.dtype = "Float32"
	case "float64":
		st.dtype = "Float64"
	case "same":
		st.dtype = b.Bands[0].DataType
		for _, band := range b.Bands[1:] {
			if band.DataType != st.dtype {
				st.dtype = "Float32" // mixed types: one GeoTIFF type for all
			}
		}
	default:
		return st, usagef("--type %q: want same, float32 or float64", kind)
	}
	r, integer := integerRanges[st.dtype]
	if !integer && st.dtype != "Float32" && st.dtype != "Float64" {
		st.dtype = "Float32"
	}
	st.integer, st.lo, st.hi = integer, r[0], r[1]
	st.nodata = math.NaN()
	if nd := b.Bands[0].NoData; nd != nil && (!integer || (*nd >= st.lo && *nd <= st.hi && *nd == math.Trunc(*nd))) {
		st.nodata = *nd
	} else if integer {
		// The original declared no usable nodata: reserve an end of the
		// type's range that no band reached while fitting.
		lowFree, highFree := true, true
		for _, band := range b.Bands {
			lowFree = lowFree && band.Min > st.lo
			highFree = highFree && band.Max < st.hi
		}
		switch {
		case lowFree:
			st.nodata = st.lo
		case highFree:
			st.nodata = st.hi
		default:
			st.nodata = st.lo
			slog.Warn("the original bands declare no nodata and span their whole type's range; invalid pixels are written as the type's minimum", "nodata", st.lo)
		}
	}
	for _, band := range b.Bands {
		scale, off := band.Scale, band.Offset
		if scale == 0 {
			scale = 1
		}
		if !integer { // floats hold physical values directly
			scale, off = 1, 0
		}
		st.scale = append(st.scale, scale)
		st.off = append(st.off, off)
	}
	return st, nil
}

// store converts a physical value of band j into the value written, and
// returns it with the physical value that written value stands for.
func (st *storage) store(v float64, j int) (stored, physical float64) {
	if !st.integer {
		if st.dtype == "Float32" {
			v = float64(float32(v))
		}
		return v, v
	}
	q := math.Round((v - st.off[j]) / st.scale[j])
	q = max(st.lo, min(st.hi, q))
	if q == st.nodata { // keep valid pixels off nodata
		if q < st.hi {
			q++
		} else {
			q--
		}
	}
	return q, q*st.scale[j] + st.off[j]
}

func runUnfold(ctx context.Context, g *globals, o *unfoldOptions, components string) error {
	format, err := raster.ParseFormat(o.format)
	if err != nil {
		return usageError{err}
	}
	b, err := transform.ReadBasis(o.basis)
	if err != nil {
		return err
	}
	st, err := newStorage(b, o.dtype)
	if err != nil {
		return err
	}
	if err := raster.CheckTarget(o.out, o.overwrite); err != nil {
		return err
	}
	cs, err := openImage(components, nil)
	if err != nil {
		return err
	}
	k, p := cs.Len(), len(b.Bands)
	if k > len(b.Eigenvectors) {
		return fmt.Errorf("%s has %d bands but the basis %s has only %d components", components, k, o.basis, len(b.Eigenvectors))
	}
	if fp, ok := cs.Metadata["BANDFOLD_BASIS"]; ok && fp != b.Fingerprint() && !o.ignoreBasis {
		return fmt.Errorf("%s was folded with basis %s, but %s is basis %s; pass --ignore-basis-mismatch to unfold anyway", components, fp, o.basis, b.Fingerprint())
	} else if !ok {
		g.log.Warn("the components record no basis; make sure it is the one they were folded with", "file", components)
	}
	proj, err := transform.NewProjector(b, k)
	if err != nil {
		return fmt.Errorf("basis %s: %w", o.basis, err)
	}

	var orig *raster.Stack
	if o.compare != "" {
		opts, err := o.input.options()
		if err != nil {
			return err
		}
		if orig, err = openImage(o.compare, opts); err != nil {
			return err
		}
		if orig.Len() != p {
			return fmt.Errorf("%s has %d bands but the basis %s has %d", o.compare, orig.Len(), o.basis, p)
		}
		if err := cs.Grid.Compare(orig.Grid); err != nil {
			return fmt.Errorf("%s is not on the grid of %s: %w", o.compare, components, err)
		}
	}

	spec := raster.Spec{Grid: cs.Grid, Bands: p, DataType: st.dtype, NoData: &st.nodata, Format: format,
		CreationOptions: o.co, Overwrite: o.overwrite,
		Metadata: map[string]string{"BANDFOLD_BASIS": b.Fingerprint(), "BANDFOLD_COMPONENTS": fmt.Sprint(k), "BANDFOLD_VERSION": version}}
	for j, band := range b.Bands {
		spec.Descriptions = append(spec.Descriptions, band.Name)
		if st.integer && (st.scale[j] != 1 || st.off[j] != 0) {
			spec.Scales, spec.Offsets = st.scale, st.off
		}
	}
	out, err := raster.Create(o.out, spec)
	if err != nil {
		return err
	}
	defer out.Abort()

	scenes := []*raster.Stack{cs}
	if orig != nil {
		scenes = append(scenes, orig)
	}
	// One scan per image over the same tiles, sized for the p restored
	// bands: job k of each is tile k.
	restored := &raster.Stack{Grid: cs.Grid, Bands: make([]raster.Band, p), BlockW: cs.BlockW, BlockH: cs.BlockH}
	tg := grid(restored, o.input.tile)
	same := func(*raster.Stack) tiles.Grid { return tg }
	csScan := newScanOn(scenes[:1], same, 1, 0, 1)
	var origScan *scan
	if orig != nil {
		origScan = newScanOn(scenes[1:], same, 1, 0, 1)
	}
	loss, lossW := transform.NewLoss(p), transform.NewLoss(p)
	var pixels int64
	pool := &sync.Pool{New: func() any { return &unfoldTile{} }}
	err = tiles.Run(ctx, csScan.runTiles(), tiles.Options{Workers: g.workers, Progress: g.progress("unfold", csScan.pixels())},
		func(int) (tiles.Worker[*unfoldTile], error) {
			w := &unfoldWorker{comp: csScan.newReadWorker(), proj: proj.Clone(), st: &st, p: p, pool: pool}
			if origScan != nil {
				w.orig = origScan.newReadWorker()
			}
			return w, nil
		},
		func(t tiles.Tile, ut *unfoldTile) error {
			err := out.Write(t, ut.out)
			pixels += ut.pixels
			if orig != nil {
				loss.Merge(ut.loss)
				lossW.Merge(ut.lossW)
			}
			pool.Put(ut)
			return err
		})
	if err != nil {
		return err
	}
	if err := out.Commit(); err != nil {
		return err
	}
	sum := unfoldSummary{Output: o.out, Components: k, Bands: p, Type: st.dtype, Pixels: pixels}
	g.info("%s: %d bands rebuilt from %d components, %d valid pixels, %s", o.out, p, k, pixels, st.dtype)
	if orig != nil {
		if err := compareReport(g, o, &sum, loss, lossW, components); err != nil {
			return err
		}
	}
	return g.emit(sum)
}

// compareReport fills the loss figures and the compression ratio.
func compareReport(g *globals, o *unfoldOptions, sum *unfoldSummary, loss, lossW *transform.Loss, components string) error {
	if loss.Pixels() == 0 {
		return fmt.Errorf("no pixel is valid in both %s and %s", components, o.compare)
	}
	r := loss.Report()
	sum.LossReport = &r
	rw := lossW.Report().RMSE
	sum.RMSEWritten = &rw
	var deflate int64
	for _, p := range splitStack(o.compare) {
		n, err := raster.DeflateSize(p, filepath.Dir(o.out))
		if err != nil {
			return err
		}
		deflate += n
	}
	sum.OriginalDeflateBytes = deflate
	sum.ComponentsBytes = fileSize(components)
	sum.BasisBytes = fileSize(o.basis)
	if sum.ComponentsBytes+sum.BasisBytes > 0 {
		ratio := float64(deflate) / float64(sum.ComponentsBytes+sum.BasisBytes)
		sum.CompressionRatio = &ratio
	}
	if !g.quiet {
		w := g.stderr
		fmt.Fprintf(w, "loss against %s over %d pixels:\n", o.compare, loss.Pixels())
		fmt.Fprintf(w, "  rmse %.6g (written values %.6g), max abs error %.6g, mean spectral angle %.4f deg\n", r.RMSE, rw, r.MaxAbs, r.MeanSAM)
		if r.MeanPSNR != nil {
			fmt.Fprintf(w, "  mean psnr %.2f dB\n", *r.MeanPSNR)
		}
		if sum.CompressionRatio != nil {
			fmt.Fprintf(w, "  compression %.2f : 1 (lossless DEFLATE copy %d bytes; components %d + basis %d bytes)\n",
				*sum.CompressionRatio, deflate, sum.ComponentsBytes, sum.BasisBytes)
		}
	}
	return nil
}

func fileSize(path string) int64 {
	fi, err := os.Stat(path)
	if err != nil {
		return 0
	}
	return fi.Size()
}

type unfoldTile struct {
	out         []float64
	pixels      int64
	loss, lossW *transform.Loss
	written     []float64
}

type unfoldWorker struct {
	comp, orig *readWorker
	proj       *transform.Projector
	st         *storage
	p          int
	pool       *sync.Pool
	recon      []float64
}

func (w *unfoldWorker) Do(_ context.Context, t tiles.Tile) (*unfoldTile, error) {
	y, valid, count, err := w.comp.read(t.Index)
	if err != nil {
		return nil, err
	}
	n, p := t.Pixels(), w.p
	if cap(w.recon) < n*p {
		w.recon = make([]float64, n*p)
	}
	recon := w.recon[:n*p]
	w.proj.Unfold(recon, y)
	ut := w.pool.Get().(*unfoldTile)
	ut.pixels = int64(count)
	if cap(ut.out) < n*p {
		ut.out = make([]float64, n*p)
		ut.written = make([]float64, n*p)
	}
	ut.out, ut.written = ut.out[:n*p], ut.written[:n*p]
	for i := range n {
		for j := range p {
			at := i*p + j
			if !valid[i] {
				ut.out[at] = w.st.nodata
				continue
			}
			ut.out[at], ut.written[at] = w.st.store(recon[at], j)
		}
	}
	if w.orig != nil {
		x, ovalid, _, err := w.orig.read(t.Index)
		if err != nil {
			return nil, err
		}
		for i := range ovalid {
			ovalid[i] = ovalid[i] && valid[i]
		}
		ut.loss = transform.NewLoss(p)
		ut.lossW = transform.NewLoss(p)
		ut.loss.Add(x, recon, ovalid)
		ut.lossW.Add(x, ut.written, ovalid)
	}
	return ut, nil
}

func (w *unfoldWorker) Close() error {
	err := w.comp.Close()
	if w.orig != nil {
		if e := w.orig.Close(); err == nil {
			err = e
		}
	}
	return err
}
