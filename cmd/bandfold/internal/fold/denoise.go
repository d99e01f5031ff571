package fold

import (
	"cmp"
	"context"
	"fmt"
	"strings"
	"sync"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform"
)

// DenoiseOptions are the options of Denoise.
type DenoiseOptions struct {
	Image, Basis, Out string
	// Components is the number k of leading components kept; 0 takes the
	// basis's.
	Components int
	// Type is same (the bands' type), float32 or float64.
	Type            string
	Input           jobkit.Input
	Format          raster.Format
	CreationOptions []string
	Overwrite       bool
}

// DenoiseResult is what Denoise wrote.
type DenoiseResult struct {
	Output string `json:"output"`
	// Item is the STAC Item written beside the output.
	Item       string `json:"item"`
	Method     string `json:"method"`
	Components int    `json:"components"`
	Bands      int    `json:"bands"`
	Type       string `json:"type"`
	Pixels     int64  `json:"pixels"`
}

// denoising is one Denoise run: the image, the basis and its projector.
type denoising struct {
	env   jobkit.Env
	o     *DenoiseOptions
	basis *transform.Basis
	st    transform.Storage
	img   *raster.Stack
	proj  *transform.Projector
}

// Denoise folds an image onto the k leading components of a basis and
// unfolds them at once, x̂ = mean + Σ_N A_k A_kᵀ (x − mean) for an MNF
// basis (the MNF noise removal of Green et al. 1988) or
// mean + W_k W_kᵀ (x − mean) for a principal component one, without
// writing the components. Bands the basis excluded are dropped from the
// image by their numbers. A failure leaves no output.
func Denoise(ctx context.Context, env jobkit.Env, o DenoiseOptions) (_ *DenoiseResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	d := &denoising{env: env, o: &o}
	defer func() {
		if d.img != nil {
			d.img.Close()
		}
	}()
	if err := d.open(); err != nil {
		return nil, err
	}
	p := len(d.basis.Bands)
	spec := restoredSpec(d.img.Grid, d.basis, &d.st, d.proj.Components(), env.Version)
	carryProvenance(spec.Metadata, d.img.Metadata)
	if date, _, err := raster.SceneDate(d.img.Paths[0]); err == nil && spec.Metadata["ACQUISITION_DATE"] == "" {
		spec.Metadata["ACQUISITION_DATE"] = date.Label
	}
	spec.Format, spec.CreationOptions, spec.Overwrite = o.Format, o.CreationOptions, o.Overwrite
	dst, err := raster.Create(o.Out, spec)
	if err != nil {
		return nil, err
	}
	defer dst.Abort()
	pixels, err := d.run(ctx, dst)
	if err != nil {
		return nil, err
	}
	if err := dst.Finish(); err != nil {
		return nil, err
	}
	item, err := jobkit.RasterItem(dst.Temp(), o.Out, strings.Split(o.Image, ",")[0], "bandfold "+string(d.basis.Method)+" denoising of "+o.Image, o.Format == raster.COG, o.Overwrite)
	if err != nil {
		return nil, err
	}
	defer item.Abort()
	if err := jobkit.CommitWithItem(dst, item); err != nil {
		return nil, err
	}
	return &DenoiseResult{Output: o.Out, Item: item.Path(), Method: string(d.basis.Method), Components: d.proj.Components(), Bands: p, Type: d.st.DataType, Pixels: pixels}, nil
}

// open checks the options and opens the basis and the image.
func (d *denoising) open() error {
	o := d.o
	if o.Format == "" {
		o.Format = raster.GTiff
	}
	if o.Type == "" {
		o.Type = "same"
	}
	if o.Components < 0 {
		return jobkit.Usagef("--components %d: must be positive", o.Components)
	}
	if err := o.Input.Check(); err != nil {
		return err
	}
	ins := append(jobkit.ArgPaths("input", []string{o.Image}, o.Input.Masks), output.Path{Role: "basis", Path: o.Basis})
	if err := jobkit.CheckOutputs(ins, jobkit.RasterOutputs(o.Out), o.Overwrite); err != nil {
		return err
	}
	b, err := transform.ReadBasis(o.Basis)
	if err != nil {
		return err
	}
	d.basis = b
	if b.Method == "" {
		b.Method = transform.PCA
	}
	k := cmp.Or(o.Components, b.Components)
	if k > len(b.Bands) {
		return jobkit.Usagef("--components %d: the basis %s has %d components", k, o.Basis, len(b.Bands))
	}
	if d.st, err = transform.NewStorage(b, o.Type); err != nil {
		return jobkit.Usage(fmt.Errorf("--%w", err))
	}
	if d.st.Warning != "" {
		d.env.Warn("%s", d.st.Warning)
	}
	if d.proj, err = transform.NewProjector(b, k); err != nil {
		return fmt.Errorf("basis %s: %w", o.Basis, err)
	}
	in, err := o.Input.ForBasis(b, o.Basis, o.Image)
	if err != nil {
		return err
	}
	if d.img, err = jobkit.OpenImage(o.Image, in.Options()); err != nil {
		return err
	}
	if err := jobkit.DistinctFromStacks([]*raster.Stack{d.img}, output.Path{Role: "output", Path: o.Out}); err != nil {
		return err
	}
	return jobkit.CheckBands(b, o.Basis, d.img, jobkit.BandCheck{Selected: o.Input.Bands != nil})
}

// run folds and unfolds every tile and writes it.
func (d *denoising) run(ctx context.Context, dst *raster.Output) (int64, error) {
	sc := jobkit.NewScan([]*raster.Stack{d.img}, jobkit.TileGrid(d.o.Input.Tile), 1, jobkit.Shard{})
	pool := &sync.Pool{New: func() any { return &denoiseTile{} }}
	var pixels int64
	err := tiles.Run(ctx, sc.RunTiles(), tiles.Options{Workers: d.env.WorkerCount(), Progress: d.env.ProgressFor("denoise", sc.Pixels())},
		func(int) (tiles.Worker[*denoiseTile], error) {
			return &denoiseWorker{Reader: sc.NewReader(), proj: d.proj.Clone(), st: &d.st, pool: pool}, nil
		},
		func(t tiles.Tile, dt *denoiseTile) error {
			pixels += dt.pixels
			err := dst.Write(t, dt.out)
			pool.Put(dt)
			return err
		})
	return pixels, err
}

type denoiseTile struct {
	out    []float64
	pixels int64
}

type denoiseWorker struct {
	*jobkit.Reader
	proj     *transform.Projector
	st       *transform.Storage
	pool     *sync.Pool
	y, recon []float64
}

func (w *denoiseWorker) Do(_ context.Context, t tiles.Tile) (*denoiseTile, error) {
	x, valid, count, err := w.Read(t.Index)
	if err != nil {
		return nil, err
	}
	n, p, k := t.Pixels(), w.proj.Bands(), w.proj.Components()
	w.y, w.recon = jobkit.Grow(w.y, n*k), jobkit.Grow(w.recon, n*p)
	w.proj.Fold(w.y, x)
	w.proj.Unfold(w.recon, w.y)
	dt := w.pool.Get().(*denoiseTile)
	dt.pixels = int64(count)
	dt.out = jobkit.Grow(dt.out, n*p)
	w.st.StorePixels(dt.out, nil, w.recon, valid[:n])
	return dt, nil
}
