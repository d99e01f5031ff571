package fold

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sync"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform"
)

// UnfoldOptions are the options of Unfold.
type UnfoldOptions struct {
	// Components is the component image written by Fold.
	Components string
	Basis      string
	Out        string
	// Type is same (the original bands' type), float32 or float64.
	Type string
	// Compare, when set, is the original image to measure the loss
	// against; Input applies to it.
	Compare             string
	Input               jobkit.Input
	Format              raster.Format
	CreationOptions     []string
	Overwrite           bool
	IgnoreBasisMismatch bool
}

// UnfoldResult is what Unfold wrote and, with Compare, the loss.
type UnfoldResult struct {
	Output     string `json:"output"`
	Components int    `json:"components"`
	Bands      int    `json:"bands"`
	Type       string `json:"type"`
	Pixels     int64  `json:"pixels"`
	// Item is the STAC Item written beside the output.
	Item string `json:"item"`
	*transform.LossReport
	// OverallPSNR is the PSNR of the overall RMSE, 20 log10(peak / RMSE),
	// with PSNRPeak the largest band range Max − Min recorded in the basis
	// (the peak fold's budget uses); nil for a zero error. The per-band
	// values (psnr_db) use each band's own range in the original.
	OverallPSNR          *float64 `json:"psnr_db,omitempty"`
	PSNRPeak             float64  `json:"psnr_peak,omitempty"`
	RMSEWritten          *float64 `json:"rmse_written,omitempty"`
	CompressionRatio     *float64 `json:"compression_ratio,omitempty"`
	OriginalDeflateBytes int64    `json:"original_deflate_bytes,omitempty"`
	ComponentsBytes      int64    `json:"components_bytes,omitempty"`
	BasisBytes           int64    `json:"basis_bytes,omitempty"`
	// Compared is the image the loss was measured against, and
	// ComparedPixels the pixels valid in both.
	Compared       string `json:"compared,omitempty"`
	ComparedPixels int64  `json:"compared_pixels,omitempty"`
}

// unfolding is one run of Unfold.
type unfolding struct {
	env   jobkit.Env
	o     *UnfoldOptions
	basis *transform.Basis
	st    transform.Storage
	comps *raster.Stack
	orig  *raster.Stack
	proj  *transform.Projector
}

// Unfold rebuilds every band from component scores, x = mean + s (W_k y),
// writes them, and with Compare measures the loss. A failure at any step
// leaves no output.
func Unfold(ctx context.Context, env jobkit.Env, o UnfoldOptions) (_ *UnfoldResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	u := &unfolding{env: env, o: &o}
	defer u.close()
	if err := u.open(); err != nil {
		return nil, err
	}
	p := len(u.basis.Bands)
	k := u.comps.Len()
	spec := restoredSpec(u.comps.Grid, u.basis, &u.st, k, env.Version)
	carryProvenance(spec.Metadata, u.comps.Metadata)
	spec.Format, spec.CreationOptions, spec.Overwrite = o.Format, o.CreationOptions, o.Overwrite
	dst, err := raster.Create(o.Out, spec)
	if err != nil {
		return nil, err
	}
	defer dst.Abort()
	loss, lossW, pixels, err := u.rebuild(ctx, dst)
	if err != nil {
		return nil, err
	}
	if err := dst.Finish(); err != nil {
		return nil, err
	}
	res := &UnfoldResult{Output: o.Out, Components: k, Bands: p, Type: u.st.DataType, Pixels: pixels}
	if u.orig != nil {
		if err := u.compare(res, loss, lossW); err != nil {
			return nil, err
		}
	}
	item, err := jobkit.RasterItem(dst.Temp(), o.Out, o.Components, "bandfold bands restored from "+o.Components, o.Format == raster.COG, o.Overwrite)
	if err != nil {
		return nil, err
	}
	defer item.Abort()
	if err := jobkit.CommitWithItem(dst, item); err != nil {
		return nil, err
	}
	res.Item = item.Path()
	return res, nil
}

// close releases the images.
func (u *unfolding) close() {
	for _, s := range []*raster.Stack{u.comps, u.orig} {
		if s != nil {
			s.Close()
		}
	}
}

// restoredSpec describes an image of the basis's bands rebuilt from k
// components and stored as st, on grid g.
func restoredSpec(g raster.Grid, b *transform.Basis, st *transform.Storage, k int, version string) raster.Spec {
	spec := raster.Spec{Grid: g, Bands: len(b.Bands), DataType: st.DataType, NoData: &st.NoData,
		Metadata: map[string]string{"BANDFOLD_BASIS": b.Fingerprint(), "BANDFOLD_COMPONENTS": fmt.Sprint(k), "BANDFOLD_VERSION": version}}
	for j, band := range b.Bands {
		spec.Descriptions = append(spec.Descriptions, band.Name)
		if st.Integer && (st.Scale[j] != 1 || st.Offset[j] != 0) {
			spec.Scales, spec.Offsets = st.Scale, st.Offset
		}
		if band.WavelengthNM > 0 && spec.Wavelengths == nil {
			spec.Wavelengths = make([]raster.Wavelength, len(b.Bands))
		}
	}
	// The wavelengths and widths the basis recorded of its source bands.
	for j, band := range b.Bands {
		if spec.Wavelengths != nil {
			spec.Wavelengths[j] = raster.Wavelength{CentreNM: band.WavelengthNM, FWHMNM: band.FWHMNM}
		}
	}
	return spec
}

// open checks the options and opens the basis, the components and the
// original.
func (u *unfolding) open() error {
	o := u.o
	if o.Format == "" {
		o.Format = raster.GTiff
	}
	if o.Type == "" {
		o.Type = "same"
	}
	if err := o.Input.Check(); err != nil {
		return err
	}
	ins := []output.Path{{Role: "components", Path: o.Components}, {Role: "basis", Path: o.Basis}}
	if o.Compare != "" {
		for _, p := range jobkit.SplitStack(o.Compare) {
			ins = append(ins, output.Path{Role: "original", Path: p})
		}
	}
	for _, m := range jobkit.MaskPaths(o.Input.Masks) {
		ins = append(ins, output.Path{Role: "mask", Path: m})
	}
	if err := jobkit.CheckOutputs(ins, jobkit.RasterOutputs(o.Out), o.Overwrite); err != nil {
		return err
	}
	b, err := transform.ReadBasis(o.Basis)
	if err != nil {
		return err
	}
	u.basis = b
	if u.st, err = transform.NewStorage(b, o.Type); err != nil {
		return jobkit.Usage(fmt.Errorf("--%w", err))
	}
	if u.st.Warning != "" {
		u.env.Warn("%s", u.st.Warning)
	}
	if u.comps, err = jobkit.OpenImage(o.Components, nil); err != nil {
		return err
	}
	k := u.comps.Len()
	if k > len(b.Eigenvectors) {
		return fmt.Errorf("%s has %d bands but the basis %s has only %d components", o.Components, k, o.Basis, len(b.Eigenvectors))
	}
	if fp, ok := u.comps.Metadata["BANDFOLD_BASIS"]; ok && fp != b.Fingerprint() && !o.IgnoreBasisMismatch {
		return fmt.Errorf("%s was folded with basis %s, but %s is basis %s; pass --ignore-basis-mismatch to unfold anyway", o.Components, fp, o.Basis, b.Fingerprint())
	} else if !ok {
		u.env.Warn("%s records no basis; make sure it is the one it was folded with", o.Components)
	}
	if u.proj, err = transform.NewProjector(b, k); err != nil {
		return fmt.Errorf("basis %s: %w", o.Basis, err)
	}
	if o.Compare == "" {
		return nil
	}
	in, err := o.Input.ForBasis(b, o.Basis, o.Compare)
	if err != nil {
		return err
	}
	if u.orig, err = jobkit.OpenImage(o.Compare, in.Options()); err != nil {
		return err
	}
	if err := jobkit.CheckBands(b, o.Basis, u.orig, jobkit.BandCheck{Selected: o.Input.Bands != nil}); err != nil {
		return err
	}
	if err := u.comps.Grid.Compare(u.orig.Grid); err != nil {
		return fmt.Errorf("%s is not on the grid of %s: %w", o.Compare, o.Components, err)
	}
	return nil
}

// rebuild writes every tile and measures the loss of the unrounded and the
// written values against the original.
func (u *unfolding) rebuild(ctx context.Context, dst *raster.Output) (loss, lossW *transform.Loss, pixels int64, err error) {
	p := len(u.basis.Bands)
	// One scan per image over the same tiles, sized for the p restored
	// bands: item k of each is tile k.
	restored := &raster.Stack{Grid: u.comps.Grid, Bands: make([]raster.Band, p), BlockW: u.comps.BlockW, BlockH: u.comps.BlockH}
	tg := jobkit.GridFor(restored, u.o.Input.Tile)
	same := func(*raster.Stack) tiles.Grid { return tg }
	compScan := jobkit.NewScan([]*raster.Stack{u.comps}, same, 1, jobkit.Shard{})
	var origScan *jobkit.Scan
	if u.orig != nil {
		origScan = jobkit.NewScan([]*raster.Stack{u.orig}, same, 1, jobkit.Shard{})
	}
	loss, lossW = transform.NewLoss(p), transform.NewLoss(p)
	pool := &sync.Pool{New: func() any { return &unfoldTile{} }}
	err = tiles.Run(ctx, compScan.RunTiles(), tiles.Options{Workers: u.env.WorkerCount(), Progress: u.env.ProgressFor("unfold", compScan.Pixels())},
		func(int) (tiles.Worker[*unfoldTile], error) {
			w := &unfoldWorker{comp: compScan.NewReader(), proj: u.proj.Clone(), st: &u.st, p: p, pool: pool}
			if origScan != nil {
				w.orig = origScan.NewReader()
			}
			return w, nil
		},
		func(t tiles.Tile, ut *unfoldTile) error {
			err := dst.Write(t, ut.out)
			pixels += ut.pixels
			if ut.loss != nil {
				loss.Merge(ut.loss)
				lossW.Merge(ut.lossW)
			}
			pool.Put(ut)
			return err
		})
	return loss, lossW, pixels, err
}

// compare fills the loss figures and the compression ratio.
func (u *unfolding) compare(res *UnfoldResult, loss, lossW *transform.Loss) error {
	o := u.o
	if loss.Pixels() == 0 {
		return fmt.Errorf("no pixel is valid in both %s and %s: nothing to compare", o.Components, o.Compare)
	}
	r := loss.Report()
	res.LossReport = &r
	rw := lossW.Report().RMSE
	res.RMSEWritten = &rw
	res.Compared, res.ComparedPixels = o.Compare, loss.Pixels()
	res.PSNRPeak = u.basis.PeakRange()
	if ps := transform.PSNR(r.RMSE*r.RMSE, res.PSNRPeak); !math.IsInf(ps, 0) && !math.IsNaN(ps) {
		res.OverallPSNR = &ps
	}
	var deflate int64
	for _, p := range u.orig.Paths { // the files read: a STAC item's assets, not the item
		n, err := raster.DeflateSize(p, filepath.Dir(o.Out))
		if err != nil {
			return err
		}
		deflate += n
	}
	res.OriginalDeflateBytes = deflate
	var err error
	if res.ComponentsBytes, err = fileSize(o.Components); err != nil {
		return err
	}
	if res.BasisBytes, err = fileSize(o.Basis); err != nil {
		return err
	}
	if res.ComponentsBytes+res.BasisBytes > 0 {
		ratio := float64(deflate) / float64(res.ComponentsBytes+res.BasisBytes)
		res.CompressionRatio = &ratio
	}
	return nil
}

// fileSize returns the size of a local file, or 0 for a GDAL virtual path.
func fileSize(path string) (int64, error) {
	if raster.IsVirtual(path) {
		return 0, nil
	}
	fi, err := os.Stat(path)
	if err != nil {
		return 0, fmt.Errorf("size of %s: %w", path, jobkit.UnwrapPath(err))
	}
	return fi.Size(), nil
}

type unfoldTile struct {
	out, written []float64
	pixels       int64
	loss, lossW  *transform.Loss
}

type unfoldWorker struct {
	comp, orig *jobkit.Reader
	proj       *transform.Projector
	st         *transform.Storage
	p          int
	pool       *sync.Pool
	recon      []float64
}

func (w *unfoldWorker) Do(_ context.Context, t tiles.Tile) (*unfoldTile, error) {
	y, valid, count, err := w.comp.Read(t.Index)
	if err != nil {
		return nil, err
	}
	n, p := t.Pixels(), w.p
	w.recon = jobkit.Grow(w.recon, n*p)
	recon := w.recon
	w.proj.Unfold(recon, y)
	ut := w.pool.Get().(*unfoldTile)
	ut.pixels = int64(count)
	ut.out, ut.written = jobkit.Grow(ut.out, n*p), jobkit.Grow(ut.written, n*p)
	w.st.StorePixels(ut.out, ut.written, recon, valid[:n])
	ut.loss, ut.lossW = nil, nil
	if w.orig != nil {
		x, ovalid, _, err := w.orig.Read(t.Index)
		if err != nil {
			return nil, err
		}
		for i := range ovalid {
			ovalid[i] = ovalid[i] && valid[i]
		}
		ut.loss, ut.lossW = transform.NewLoss(p), transform.NewLoss(p)
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

// provenanceKeys are the dataset metadata an output made band for band from
// an input carries over: the invented scenario's name and the date.
var provenanceKeys = []string{"SCENARIO", "ACQUISITION_DATE"}

// carryProvenance copies the provenance keys of an input's metadata into
// an output's.
func carryProvenance(dst, src map[string]string) {
	for _, k := range provenanceKeys {
		if v, ok := src[k]; ok && v != "" {
			dst[k] = v
		}
	}
}
