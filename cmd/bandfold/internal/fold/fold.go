package fold

import (
	"cmp"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform"
)

// FoldOptions are the options of Fold and FoldBatch.
type FoldOptions struct {
	// Scenes are the IMAGE arguments (FoldBatch also reads List).
	Scenes []string
	// List is a file with one input per line (FoldBatch); relative paths
	// are relative to the list file's folder.
	List  string
	Input jobkit.Input
	Basis string
	// Out is the component image of one scene (Fold); OutDir and Name
	// (with {stem}) place those of many (FoldBatch).
	Out, OutDir, Name string
	// Components is the number of components; 0 takes the basis's k.
	Components int
	Format     raster.Format
	// Type is float32, float64 or int16 (scaled per component).
	Type            string
	IgnoreBandNames bool
	CreationOptions []string
	Overwrite       bool
	// Preview, with Out, also writes an RGB quicklook of components 1-3.
	Preview string
	// Shard takes scenes I, I+N, ... of the list (FoldBatch).
	Shard jobkit.Shard
	// OnScene, when set, receives each scene's result of a batch as it
	// finishes.
	OnScene func(FoldScene)
	// Budget, when set, chooses the components and the quantised integer
	// codes from an error budget and proves it (see budget.go); it excludes
	// Components and Type.
	Budget Budget
}

// FoldScene is the result of folding one scene.
type FoldScene struct {
	Input  string `json:"input"`
	Output string `json:"output"`
	// Status is written, skipped (complete already) or failed; Damaged
	// says why an output a batch rerun found complete was written again
	// (cut short, or values other than those written).
	Status     string `json:"status"`
	Damaged    string `json:"damaged,omitempty"`
	Error      string `json:"error,omitempty"`
	Pixels     int64  `json:"pixels,omitempty"`
	Components int    `json:"components,omitempty"`
	Type       string `json:"type,omitempty"`
	// ExplainedFit is the kept share of variance on the fitting scene,
	// ExplainedScene on this one (nil when undefined: no variance).
	ExplainedFit   float64  `json:"explained_fit,omitempty"`
	ExplainedScene *float64 `json:"explained_scene"`
	// Saturated is the share of valid scores clamped by --type int16.
	Saturated float64 `json:"saturated_fraction"`
	Preview   string  `json:"preview,omitempty"`
	// Item is the STAC Item written beside the output.
	Item    string  `json:"item,omitempty"`
	Seconds float64 `json:"seconds"`
	// BudgetReport holds the predicted and achieved error of a budgeted
	// fold.
	*BudgetReport
}

// folding is what every scene of a run shares.
type folding struct {
	env    jobkit.Env
	o      *FoldOptions
	basis  *transform.Basis
	proj   *transform.Projector
	k      int
	dtype  string
	format raster.Format
	// plan is the allocation of a budgeted fold, nil otherwise.
	plan *budgetPlan
}

var foldTypes = map[string]string{"float32": "Float32", "float64": "Float64", "int16": "Int16"}

// readBasis checks the options every fold shares and reads the basis.
func (o *FoldOptions) readBasis() (*transform.Basis, error) {
	if o.Format == "" {
		o.Format = raster.GTiff
	}
	if err := o.Input.Check(); err != nil {
		return nil, err
	}
	if o.Preview != "" && raster.IsVirtual(o.Preview) {
		return nil, jobkit.Usagef("--preview %s: write the PNG to a local path", o.Preview)
	}
	return transform.ReadBasis(o.Basis)
}

// prepare checks the options and reads the basis.
func prepareFold(env jobkit.Env, o *FoldOptions) (*folding, error) {
	if o.Budget.set() {
		return prepareBudget(env, o)
	}
	if o.Type == "" {
		o.Type = "float32"
	}
	dtype, ok := foldTypes[strings.ToLower(o.Type)]
	if !ok {
		return nil, jobkit.Usagef("--type %q: want float32, float64 or int16", o.Type)
	}
	if o.Components < 0 {
		return nil, jobkit.Usagef("--components %d: must be positive", o.Components)
	}
	b, err := o.readBasis()
	if err != nil {
		return nil, err
	}
	k := b.Components
	if o.Components > 0 {
		k = o.Components
	}
	if k > len(b.Bands) {
		return nil, jobkit.Usagef("--components %d: the basis %s has %d components", k, o.Basis, len(b.Bands))
	}
	proj, err := transform.NewProjector(b, k)
	if err != nil {
		return nil, fmt.Errorf("basis %s: %w", o.Basis, err)
	}
	if o.Input, err = o.Input.WithBasis(b, o.Basis); err != nil {
		return nil, err
	}
	return &folding{env: env, o: o, basis: b, proj: proj, k: k, dtype: dtype, format: o.Format}, nil
}

// Fold projects one scene onto the kept components of a basis and writes
// the component image (and, with Preview, its quicklook).
func Fold(ctx context.Context, env jobkit.Env, o FoldOptions) (_ *FoldScene, err error) {
	defer func() { err = jobkit.Classify(err) }()
	if len(o.Scenes) != 1 || o.Out == "" {
		return nil, jobkit.Usagef("fold writes one scene to --out; use --out-dir for %d scenes", len(o.Scenes))
	}
	if o.Shard.OrWhole().N > 1 {
		return nil, jobkit.Usagef("--shard applies to batches: use --out-dir")
	}
	f, err := prepareFold(env, &o)
	if err != nil {
		return nil, err
	}
	outs := jobkit.RasterOutputs(o.Out)
	if o.Preview != "" {
		outs = append(outs, output.Path{Role: "preview", Path: o.Preview})
	}
	ins := append(jobkit.ArgPaths("input", o.Scenes, o.Input.Masks), output.Path{Role: "basis", Path: o.Basis})
	if err := jobkit.CheckOutputs(ins, outs, o.Overwrite); err != nil {
		return nil, err
	}
	res, err := f.scene(ctx, o.Scenes[0], o.Out, false)
	if err != nil {
		return nil, err
	}
	return &res, nil
}

// completeKey is the metadata item holding a component image's completion
// record.
const completeKey = "BANDFOLD_COMPLETE"

// record identifies a finished component image by everything that shapes
// its bytes: the basis, the inputs (path, size, time), the bands, nodata
// and masks, the components, type, format and creation options, and the
// tool version. The completion record written is it followed by the
// checksum of the values written (valueSum); a batch rerun skips an output
// only on an exact match of both, the checksum read back from the file
// (checkComplete), which costs a read of the output.
func (f *folding) record(s *raster.Stack, in jobkit.Input) (string, error) {
	fps, err := jobkit.Fingerprints([]*raster.Stack{s})
	if err != nil {
		return "", err
	}
	h := sha256.New()
	for _, fp := range fps {
		fmt.Fprintf(h, "input %s|%d|%s\n", fp.Path, fp.Size, fp.ModTime.Format(time.RFC3339Nano))
	}
	fmt.Fprintf(h, "bands %v\nnodata %v\nmasks %q\ntile %d\n", in.Bands, in.NoData, maskRules(in.Masks), in.Tile)
	fmt.Fprintf(h, "align %v %s\ncalibrate %s\n", in.Align, in.Resampling, in.Calibrate)
	fmt.Fprintf(h, "format %s\nco %q\nversion %s\nbudget %+v\n", f.format, f.o.CreationOptions, f.env.Version, f.o.Budget)
	return fmt.Sprintf("basis=%s components=%d type=%s options=%s", f.basis.Fingerprint(), f.k, f.dtype, hex.EncodeToString(h.Sum(nil))[:16]), nil
}

// maskRules prints mask rules as ParseMask reads them.
func maskRules(rules []raster.MaskRule) []string {
	var out []string
	for _, r := range rules {
		out = append(out, r.String())
	}
	return out
}

// scene folds one image into out. In a batch, a complete output with the
// same record is skipped.
func (f *folding) scene(ctx context.Context, input, out string, batch bool) (FoldScene, error) {
	start := time.Now()
	res := FoldScene{Input: input, Output: out, Components: f.k, Type: f.dtype}
	s, record, err := f.open(input, out)
	if err != nil {
		return res, err
	}
	defer s.Close()
	overwrite := f.o.Overwrite
	if batch && !overwrite {
		skip, damaged, err := f.resume(ctx, out, record)
		switch {
		case err != nil:
			return res, err
		case skip:
			res.Status = "skipped"
			return res, nil
		}
		res.Damaged, overwrite = damaged, damaged != ""
	}
	dst, stats, err := f.write(ctx, s, out, overwrite)
	if dst != nil {
		defer dst.Abort()
	}
	if err != nil {
		return res, err
	}
	if stats.x.Count() == 0 {
		return res, jobkit.NoValidPixels(ctx, f.env, s, f.o.Input.Tile)
	}
	res.Pixels = int64(stats.x.Count())
	res.ExplainedFit = transform.Cumulative(f.basis.Eigenvalues)[f.k-1]
	if e := transform.ExplainedOn(f.basis, stats.x, stats.y); !math.IsNaN(e) {
		res.ExplainedScene = &e
	}
	res.Saturated = float64(stats.saturated) / float64(int64(f.k)*res.Pixels)
	if err := dst.SetMetadata(completeKey, record+valuesKey+f.checksum(stats.sum)); err != nil {
		return res, err
	}
	if err := dst.Finish(); err != nil {
		return res, err
	}
	if err := f.reportBudget(&res, stats, dst, s); err != nil {
		return res, err
	}
	// The preview is made and written under its temporary name before the
	// image is committed, so a failure leaves neither.
	var preview *output.File
	if f.o.Preview != "" {
		if preview, err = f.writePreview(dst.Temp(), out, overwrite); err != nil {
			return res, err
		}
		defer preview.Abort()
	}
	item, err := jobkit.RasterItem(dst.Temp(), out, strings.Split(input, ",")[0], "bandfold components ("+string(cmp.Or(f.basis.Method, transform.PCA))+") of "+input,
		f.format == raster.COG, overwrite)
	if err != nil {
		return res, err
	}
	defer item.Abort()
	if err := dst.Commit(); err != nil {
		return res, err
	}
	if err := item.Commit(); err != nil {
		os.Remove(out)
		return res, err
	}
	res.Item = item.Path()
	if preview != nil {
		if err := preview.Commit(); err != nil {
			os.Remove(out)
			os.Remove(item.Path())
			return res, err
		}
		res.Preview = f.o.Preview
	}
	res.Status = "written"
	res.Seconds = time.Since(start).Seconds()
	f.warnings(&res)
	return res, nil
}

// open opens one scene with the bands of the basis, checks it against the
// basis and the outputs, and returns it with its completion record
// (without the checksum).
func (f *folding) open(input, out string) (*raster.Stack, string, error) {
	in, err := f.o.Input.ForBasis(f.basis, f.o.Basis, input)
	if err != nil {
		return nil, "", err
	}
	s, err := jobkit.OpenImage(input, in.Options())
	if err != nil {
		return nil, "", err
	}
	outs := []output.Path{{Role: "output", Path: out}}
	if f.o.Preview != "" {
		outs = append(outs, output.Path{Role: "preview", Path: f.o.Preview})
	}
	err = jobkit.DistinctFromStacks([]*raster.Stack{s}, outs...)
	if err == nil {
		err = output.Distinct([]output.Path{{Role: "basis", Path: f.o.Basis}}, outs)
	}
	if err == nil {
		err = jobkit.CheckBands(f.basis, f.o.Basis, s, jobkit.BandCheck{Selected: f.o.Input.Bands != nil, IgnoreNames: f.o.IgnoreBandNames})
	}
	var record string
	if err == nil {
		record, err = f.record(s, in)
	}
	if err != nil {
		s.Close()
		return nil, "", err
	}
	return s, record, nil
}

// resume decides what a batch rerun does with out when it exists already
// (checkComplete): skip it, or write it again because it is damaged (said
// in damaged, and as a warning). A file that does not exist, or whose
// metadata cannot be read, is left to the write, which refuses to replace
// it without --overwrite.
func (f *folding) resume(ctx context.Context, out, record string) (skip bool, damaged string, err error) {
	md, err := raster.ReadMetadata(out)
	if err != nil {
		return false, "", nil
	}
	skip, damaged, err = checkComplete(ctx, out, md, record)
	if damaged != "" {
		f.env.Warn("%s was complete but %s: writing it again", out, damaged)
	}
	return skip, damaged, err
}

// writePreview draws the quicklook of the component image at components
// (its temporary name) and writes it under the preview's temporary name.
func (f *folding) writePreview(components, out string, overwrite bool) (*output.File, error) {
	data, err := report.ComponentPreview(components)
	if err != nil {
		return nil, fmt.Errorf("preview of %s: %w", out, err)
	}
	pv, err := output.Create(f.o.Preview, overwrite, ".png")
	if err != nil {
		return nil, err
	}
	if err := os.WriteFile(pv.Temp(), data, 0o644); err != nil {
		pv.Abort()
		return nil, fmt.Errorf("write %s: %w", f.o.Preview, jobkit.UnwrapPath(err))
	}
	return pv, nil
}

// warnings tells the user when the basis fits the scene badly or int16
// storage clamped scores.
func (f *folding) warnings(res *FoldScene) {
	if e := res.ExplainedScene; e != nil && *e < res.ExplainedFit-0.05 {
		f.env.Warn("%s: the kept components explain %.1f points less of its variance than of the fitting scene's (%.4f against %.4f): the basis may no longer fit this scene; consider refitting it (bandfold learn)",
			res.Input, 100*(res.ExplainedFit-*e), *e, res.ExplainedFit)
	}
	if res.Saturated > 0.001 {
		f.env.Warn("%s: %.2f%% of the valid scores exceed the int16 range and were clamped: the scene is far outside the fitting scene's range; use --type float32 or refit the basis", res.Output, 100*res.Saturated)
	}
}

// ComponentNames describe the first k components of a basis for band
// descriptions: "PC1 (62.10% of variance)" for principal components,
// "MNF1 (SNR 41.2)" for minimum noise fraction components, whose
// eigenvalues are 1 + the signal-to-noise ratio.
func ComponentNames(b *transform.Basis, k int) []string {
	out := make([]string, k)
	if b.Method == transform.MNF {
		snr := transform.SNR(b.Eigenvalues)
		for i := range out {
			out[i] = fmt.Sprintf("MNF%d (SNR %.3g)", i+1, snr[i])
		}
		return out
	}
	explained := transform.Explained(b.Eigenvalues)
	for i := range out {
		out[i] = fmt.Sprintf("PC%d (%.2f%% of variance)", i+1, 100*explained[i])
	}
	return out
}

// spec describes the component image.
func (f *folding) spec(s *raster.Stack) raster.Spec {
	spec := raster.Spec{Grid: s.Grid, Bands: f.k, DataType: f.dtype, Format: f.format,
		CreationOptions: f.o.CreationOptions, Descriptions: ComponentNames(f.basis, f.k)}
	var eig []string
	for i := range f.k {
		eig = append(eig, strconv.FormatFloat(f.basis.Eigenvalues[i], 'g', -1, 64))
	}
	nd := math.NaN()
	if f.dtype == "Int16" {
		nd = float64(transform.Int16NoData)
		for i := range f.k {
			scale, offset := f.basis.Int16Scaling(i)
			spec.Scales = append(spec.Scales, scale)
			spec.Offsets = append(spec.Offsets, offset)
		}
	}
	spec.NoData = &nd
	spec.Metadata = map[string]string{
		"BANDFOLD_BASIS":       f.basis.Fingerprint(),
		"BANDFOLD_BASIS_FILE":  filepath.Base(f.o.Basis),
		"BANDFOLD_MODE":        string(f.basis.Mode),
		"BANDFOLD_METHOD":      string(cmp.Or(f.basis.Method, transform.PCA)),
		"BANDFOLD_EIGENVALUES": strings.Join(eig, ","),
		"BANDFOLD_COMPONENTS":  strconv.Itoa(f.k),
		"BANDFOLD_VERSION":     f.env.Version,
	}
	carryProvenance(spec.Metadata, s.Metadata)
	if date, _, err := raster.SceneDate(s.Paths[0]); err == nil && spec.Metadata["ACQUISITION_DATE"] == "" {
		spec.Metadata["ACQUISITION_DATE"] = date.Label
	}
	return spec
}

// foldStats are the moments of a scene's bands and scores and the count of
// clamped scores.
type foldStats struct {
	x, y      *bands.Moments
	saturated int64
	// sse is the squared error of the bands rebuilt from the codes written
	// (a budgeted fold), summed over valid pixels and bands in tile order.
	sse  transform.Sum
	plan *budgetPlan
	// sum is the checksum of the values written.
	sum valueSum
}

// project folds every tile of s into dst.
func (f *folding) project(ctx context.Context, s *raster.Stack, dst *raster.Output, spec *raster.Spec, plan *budgetPlan) (foldStats, error) {
	sc := jobkit.NewScan([]*raster.Stack{s}, jobkit.TileGrid(f.o.Input.Tile), 1, jobkit.Shard{})
	p := s.Len()
	st := foldStats{x: bands.NewMoments(p), y: bands.NewMoments(f.k), plan: plan}
	var meter *transform.ErrorMeter
	if plan != nil {
		meter = transform.NewErrorMeter(f.proj)
	}
	pool := &sync.Pool{New: func() any { return &foldTile{x: bands.NewMoments(p), y: bands.NewMoments(f.k)} }}
	err := tiles.Run(ctx, sc.RunTiles(), tiles.Options{Workers: f.env.WorkerCount(), Progress: f.env.ProgressFor("fold", sc.Pixels())},
		func(int) (tiles.Worker[*foldTile], error) {
			limit := math.MaxFloat64
			if spec.DataType == "Float32" {
				limit = math.MaxFloat32
			}
			w := &foldWorker{Reader: sc.NewReader(), k: f.k, spec: spec, proj: f.proj.Clone(), pool: pool, input: jobkit.Describe(s), limit: limit, plan: plan}
			if meter != nil {
				w.meter = meter.Clone()
			}
			return w, nil
		},
		func(t tiles.Tile, ft *foldTile) error {
			var err error
			if spec.DataType == "Float32" {
				err = dst.WriteFloat32(t, ft.out32)
			} else {
				err = dst.Write(t, ft.out)
			}
			st.x.Merge(ft.x)
			st.y.Merge(ft.y)
			st.saturated += ft.saturated
			st.sse.Add(ft.sse)
			st.sum += ft.sum
			pool.Put(ft)
			return err
		})
	return st, err
}

// foldTile is one tile's result: the values to write, the moments of its
// valid pixels and the count of clamped scores.
type foldTile struct {
	out []float64
	// out32 is out converted for a Float32 output.
	out32     []float32
	x, y      *bands.Moments
	saturated int64
	// sse is the squared error of the tile rebuilt from its codes, sq the
	// squared distance of each pixel from the mean (a budgeted fold).
	sse float64
	sq  []float64
	// sum is the checksum of the values to write.
	sum valueSum
}

type foldWorker struct {
	*jobkit.Reader
	k     int
	spec  *raster.Spec
	proj  *transform.Projector
	pool  *sync.Pool
	input string
	// limit is the largest magnitude the output type holds as a finite
	// value.
	limit float64
	plan  *budgetPlan
	meter *transform.ErrorMeter
}

func (w *foldWorker) Do(_ context.Context, t tiles.Tile) (*foldTile, error) {
	x, valid, _, err := w.Read(t.Index)
	if err != nil {
		return nil, err
	}
	ft := w.pool.Get().(*foldTile)
	k, n := w.k, t.Pixels()
	ft.out = jobkit.Grow(ft.out, n*k)
	if w.plan != nil {
		ft.sq = jobkit.Grow(ft.sq, n)
		w.proj.FoldNorms(ft.out, ft.sq, x)
	} else {
		w.proj.Fold(ft.out, x)
	}
	ft.x.Reset()
	ft.y.Reset()
	ft.saturated = 0
	nd := *w.spec.NoData
	for i := range n {
		px := ft.out[i*k : i*k+k]
		if !valid[i] {
			continue
		}
		for c, v := range px {
			if !(math.Abs(v) <= w.limit) {
				return nil, fmt.Errorf("%s: the score of component %d at pixel (%d, %d) is %g, beyond what %s holds: the values are far outside the basis's range (use --type float64, or refit the basis)",
					w.input, c+1, t.X+i%t.W, t.Y+i/t.W, v, w.spec.DataType)
			}
		}
	}
	ft.x.AddPixels(x, valid)
	ft.y.AddPixels(ft.out, valid)
	if w.plan != nil {
		w.encode(ft, x, valid)
		ft.sum = 0
		addTile(&ft.sum, t, w.spec.Width, k, ft.out[:n*k])
		return ft, nil
	}
	for i := range n {
		px := ft.out[i*k : i*k+k]
		if !valid[i] {
			for c := range px {
				px[c] = nd
			}
			continue
		}
		if w.spec.Scales != nil {
			for c, v := range px {
				q := (v - w.spec.Offsets[c]) / w.spec.Scales[c]
				if math.Abs(q) > math.MaxInt16-0.5 {
					ft.saturated++
				}
				px[c] = float64(transform.QuantizeInt16(v, w.spec.Scales[c], w.spec.Offsets[c]))
			}
		}
	}
	ft.sum = 0
	if w.spec.DataType == "Float32" {
		ft.out32 = jobkit.Grow(ft.out32, len(ft.out))
		for i, v := range ft.out {
			ft.out32[i] = float32(v)
		}
		addTile(&ft.sum, t, w.spec.Width, k, ft.out32[:n*k])
	} else {
		addTile(&ft.sum, t, w.spec.Width, k, ft.out[:n*k])
	}
	return ft, nil
}
