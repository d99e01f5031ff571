package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"

	"github.com/spf13/cobra"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
	"bandfold/transform/change"
)

// caution is repeated wherever a change map is reported.
const caution = "A change map is a screening result: verify mapped changes against imagery or field checks before acting on them; local regulations and licensed practice govern any action taken on it."

type changeOptions struct {
	input        inputFlags
	maskBefore   string
	maskAfter    string
	out          string
	align        bool
	resampling   string
	basis        string
	components   int
	threshold    string
	minArea      string
	differences  bool
	reference    string
	previewBands string
	sample       int
	overwrite    bool
}

func newChangeCommand(g *globals) *cobra.Command {
	o := &changeOptions{}
	cmd := &cobra.Command{
		Use:   "change BEFORE AFTER --out DIR",
		Short: "Map land-cover change between two dates from component score differences",
		Long: `change projects both dates onto principal components (fitted on the pixels
valid on both dates, or from --basis), takes the differences of the scores,
estimates the no-change distribution of those differences robustly (location
and covariance, iteratively trimmed), and maps the pixels whose Mahalanobis
statistic Z exceeds the threshold. Small patches are removed with GDAL's
sieve filter (--min-area), patches are polygonized into a GeoPackage, and
areas are ground areas on the CRS's ellipsoid.

Outputs in DIR: change.tif (1 change, 0 no change, 255 nodata), magnitude.tif
(Z), pvalue.tif (no-change p-value), differences.tif (with --differences),
changes.gpkg (layer "changes") and summary.json.

` + caution,
		Example: `  bandfold change 2023.tif 2024.tif --out change-2024
  bandfold change 2023.tif 2024.tif --out change --threshold otsu --min-area 0.5ha --reference truth.gpkg
  bandfold change a.tif b.tif --out change --align --resampling bilinear --mask-after clouds-b.tif`,
		Args: cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runChange(cmd.Context(), g, o, args[0], args[1])
		},
	}
	f := cmd.Flags()
	o.input.register(f)
	f.StringVar(&o.maskBefore, "mask-before", "", "validity mask of the BEFORE date only (non-zero = valid)")
	f.StringVar(&o.maskAfter, "mask-after", "", "validity mask of the AFTER date only, on BEFORE's grid (non-zero = valid)")
	f.StringVarP(&o.out, "out", "o", "", "folder for the outputs")
	f.BoolVar(&o.align, "align", false, "warp AFTER onto BEFORE's grid with GDAL when the grids differ")
	f.StringVar(&o.resampling, "resampling", "bilinear", "resampling for --align: bilinear, nearest (categorical data), cubic, average")
	f.StringVarP(&o.basis, "basis", "b", "", "basis to use instead of fitting one on both dates")
	f.IntVarP(&o.components, "components", "k", 0, "number of components (default: 99% of the pooled variance, at least 3)")
	f.StringVar(&o.threshold, "threshold", change.DefaultThreshold, "chisq:Q, sigma:N, otsu or value:Z")
	f.StringVar(&o.minArea, "min-area", "4px", "minimum mapping unit: a number with m2, ha, km2 or px; 0 turns it off")
	f.BoolVar(&o.differences, "differences", false, "also write differences.tif (d - m per component)")
	f.StringVar(&o.reference, "reference", "", "reference change data: a raster on the same grid (non-zero = changed) or a vector file of changed polygons")
	f.StringVar(&o.previewBands, "preview-bands", "", "three 1-based bands of AFTER for preview.png (default: the first three)")
	f.IntVar(&o.sample, "sample", change.DefaultSampleSize, "pixels sampled to estimate the no-change distribution")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace an existing output folder")
	cmd.MarkFlagRequired("out")
	return cmd
}

// minArea is a parsed --min-area: a value in m² or in pixels.
type minArea struct {
	m2, px float64
}

// parseMinArea reads "0.5ha", "5000m2", "1km2", "4px" or "0".
func parseMinArea(s string) (minArea, error) {
	s = strings.ToLower(strings.TrimSpace(s))
	units := []struct {
		suffix string
		m2     float64
	}{{"km2", 1e6}, {"m2", 1}, {"ha", 1e4}, {"px", 0}}
	for _, u := range units {
		if num, ok := strings.CutSuffix(s, u.suffix); ok {
			v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
			if err != nil || v < 0 || math.IsInf(v, 0) || math.IsNaN(v) {
				break
			}
			if u.m2 == 0 {
				return minArea{px: v}, nil
			}
			return minArea{m2: v * u.m2}, nil
		}
	}
	if v, err := strconv.ParseFloat(s, 64); err == nil && v == 0 {
		return minArea{}, nil
	}
	return minArea{}, usagef("--min-area %q: want a number with m2, ha, km2 or px (for example 0.5ha), or 0", s)
}

// pixels converts the minimum area to a pixel count for the sieve.
func (m minArea) pixels(areas *raster.CellAreas) (int, error) {
	if m.m2 == 0 {
		return int(math.Ceil(m.px)), nil
	}
	if areas == nil {
		return 0, usagef("--min-area in m2, ha or km2 needs a CRS; give it in px")
	}
	return int(math.Ceil(m.m2 / areas.Mean())), nil
}

// changeSummary is summary.json and the --json output.
type changeSummary struct {
	Before        string           `json:"before"`
	After         string           `json:"after"`
	ValidPixels   int64            `json:"valid_pixels"`
	ChangedPixels int64            `json:"changed_pixels"`
	ChangedAreaM2 *float64         `json:"changed_area_m2"`
	ChangedAreaHa *float64         `json:"changed_area_ha"`
	ChangedFrac   float64          `json:"changed_fraction"`
	Threshold     thresholdSummary `json:"threshold"`
	Components    int              `json:"components"`
	Location      []float64        `json:"location"`
	Covariance    [][]float64      `json:"covariance"`
	Iterations    int              `json:"iterations"`
	Converged     bool             `json:"converged"`
	SamplePixels  int              `json:"sample_pixels"`
	MinAreaPixels int              `json:"min_area_pixels"`
	Patches       int              `json:"patches"`
	Basis         string           `json:"basis"`
	Aligned       bool             `json:"aligned"`
	Reference     *accuracy        `json:"reference,omitempty"`
	Outputs       []string         `json:"outputs"`
	AreaNote      string           `json:"area_note"`
	Caution       string           `json:"caution"`
}

type thresholdSummary struct {
	Rule string  `json:"rule"`
	Z    float64 `json:"z"`
}

// accuracy compares the map with reference data over pixels valid in both.
type accuracy struct {
	File            string  `json:"file"`
	TruePositive    int64   `json:"true_positive"`
	FalsePositive   int64   `json:"false_positive"`
	FalseNegative   int64   `json:"false_negative"`
	TrueNegative    int64   `json:"true_negative"`
	Precision       float64 `json:"precision"`
	Recall          float64 `json:"recall"`
	F1              float64 `json:"f1"`
	OverallAccuracy float64 `json:"overall_accuracy"`
	FalseAlarmRate  float64 `json:"false_alarm_rate"`
}

func (a *accuracy) finish() {
	div := func(x, y int64) float64 {
		if y == 0 {
			return math.NaN()
		}
		return float64(x) / float64(y)
	}
	a.Precision = div(a.TruePositive, a.TruePositive+a.FalsePositive)
	a.Recall = div(a.TruePositive, a.TruePositive+a.FalseNegative)
	a.F1 = div(2*a.TruePositive, 2*a.TruePositive+a.FalsePositive+a.FalseNegative)
	a.OverallAccuracy = div(a.TruePositive+a.TrueNegative, a.TruePositive+a.TrueNegative+a.FalsePositive+a.FalseNegative)
	a.FalseAlarmRate = div(a.FalsePositive, a.FalsePositive+a.TrueNegative)
}

// outDir is an output folder written under a temporary name beside its
// final place and renamed on success, so a failed run leaves nothing.
type outDir struct {
	final, tmp string
	done       bool
}

func newOutDir(final string, overwrite bool) (*outDir, error) {
	if raster.IsVirtual(final) {
		return nil, fmt.Errorf("output %s: a GDAL virtual path cannot be written atomically", final)
	}
	parent := filepath.Dir(filepath.Clean(final))
	if fi, err := os.Stat(parent); err != nil || !fi.IsDir() {
		return nil, fmt.Errorf("output %s: folder %s does not exist", final, parent)
	}
	if entries, err := os.ReadDir(final); err == nil && len(entries) > 0 && !overwrite {
		return nil, fmt.Errorf("output %s exists and is not empty (use --overwrite to replace it)", final)
	} else if err == nil && len(entries) == 0 {
		// an empty folder is fine
	} else if fi, err := os.Stat(final); err == nil && !fi.IsDir() {
		return nil, fmt.Errorf("output %s is a file, not a folder", final)
	}
	tmp := raster.TempPath(filepath.Clean(final), "")
	os.RemoveAll(tmp)
	if err := os.Mkdir(tmp, 0o755); err != nil {
		return nil, fmt.Errorf("output %s: %w", final, err)
	}
	return &outDir{final: filepath.Clean(final), tmp: tmp}, nil
}

func (d *outDir) path(name string) string { return filepath.Join(d.tmp, name) }

func (d *outDir) commit() error {
	if err := os.RemoveAll(d.final); err != nil {
		return fmt.Errorf("replace %s: %w", d.final, err)
	}
	if err := os.Rename(d.tmp, d.final); err != nil {
		return fmt.Errorf("output %s: %w", d.final, err)
	}
	d.done = true
	return nil
}

func (d *outDir) abort() {
	if !d.done {
		os.RemoveAll(d.tmp)
	}
}

func runChange(ctx context.Context, g *globals, o *changeOptions, beforeArg, afterArg string) error {
	thr, err := change.ParseThreshold(o.threshold)
	if err != nil {
		return usageError{err}
	}
	mmu, err := parseMinArea(o.minArea)
	if err != nil {
		return err
	}
	switch o.resampling {
	case "nearest", "bilinear", "cubic", "cubicspline", "lanczos", "average", "mode":
	default:
		return usagef("--resampling %q: want nearest, bilinear, cubic, cubicspline, lanczos, average or mode", o.resampling)
	}
	if o.sample < 100 {
		return usagef("--sample %d: need at least 100 pixels", o.sample)
	}
	if o.components < 0 {
		return usagef("--components %d: must be positive", o.components)
	}
	base, err := o.input.options()
	if err != nil {
		return err
	}
	withMask := func(extra string) []raster.Option {
		opts := append([]raster.Option(nil), base...)
		if extra != "" {
			opts = append(opts, raster.Mask(extra))
		}
		return opts
	}
	before, err := openImage(beforeArg, withMask(o.maskBefore))
	if err != nil {
		return err
	}
	after, aligned, cleanup, err := openAfter(g, o, before, afterArg, withMask(o.maskAfter))
	if err != nil {
		return err
	}
	defer cleanup()
	if before.Len() != after.Len() {
		return fmt.Errorf("%s has %d bands but %s has %d: both dates need the same bands", beforeArg, before.Len(), afterArg, after.Len())
	}
	p := before.Len()
	if p < 2 {
		return fmt.Errorf("%s has 1 band: principal components need at least 2", beforeArg)
	}
	if _, err := parsePreviewBands(o.previewBands, p); err != nil {
		return err
	}
	areas, err := raster.NewCellAreas(before.Grid)
	if errors.Is(err, raster.ErrNoCRS) {
		g.log.Warn("the images have no CRS: areas are given in pixels only", "file", beforeArg)
		areas = nil
	} else if err != nil {
		return fmt.Errorf("%s: %w", beforeArg, err)
	}
	minPixels, err := mmu.pixels(areas)
	if err != nil {
		return err
	}
	var ref *raster.Reference
	if o.reference != "" {
		if ref, err = raster.OpenReference(o.reference, before.Grid); err != nil {
			return err
		}
		defer ref.Close()
	}
	dir, err := newOutDir(o.out, o.overwrite)
	if err != nil {
		return err
	}
	defer dir.abort()

	pair := &pairScan{before: newScan([]*raster.Stack{before}, o.input.tile, 1, 0, 1)}
	pair.after = newScanOn([]*raster.Stack{after}, func(*raster.Stack) tiles.Grid { return grid(before, o.input.tile) }, 1, 0, 1)

	// 1. One pass over both dates: the pooled statistics (unless --basis)
	// and a bounded sample of band differences x_after - x_before.
	var given *transform.Basis
	if o.basis != "" {
		if given, err = readChangeBasis(o.basis, before, beforeArg); err != nil {
			return err
		}
	}
	first, err := pair.firstPass(ctx, g, given == nil, o.sample)
	if err != nil {
		return err
	}
	if first.valid == 0 {
		return fmt.Errorf("no pixel is valid on both dates in %s and %s after nodata and masks", beforeArg, afterArg)
	}

	// 2. The basis: fitted on the pixels valid on both dates, or given.
	b, basisName := given, o.basis
	if b == nil {
		if b, err = pooledBasis(first.acc, before, after, beforeArg, afterArg); err != nil {
			return err
		}
		basisName = "fitted on both dates"
	}
	k := b.Components
	if o.components > 0 {
		k = o.components
	}
	if k > p {
		return usagef("--components %d: the images have %d bands", k, p)
	}
	proj, err := transform.NewProjector(b, k)
	if err != nil {
		return err
	}

	// 3. The sample's score differences d = W_k^T (x_after - x_before) / s,
	// and the no-change model. Fold subtracts the mean, so it is given
	// mean + difference.
	_, diffs := first.sample.Pixels()
	for i := 0; i < len(diffs); i += p {
		for j := range p {
			diffs[i+j] += b.Mean[j]
		}
	}
	d := make([]float64, len(diffs)/p*k)
	proj.Fold(d, diffs)
	model, err := change.Fit(d, k, thr.Trim())
	if err != nil {
		return fmt.Errorf("no-change model of %s and %s: %w", beforeArg, afterArg, err)
	}
	zcut, err := thr.Resolve(k, model.Scores(nil, d))
	if err != nil {
		return usagef("--threshold %s: %v", thr, err)
	}
	g.log.Debug("no-change model", "iterations", model.Iterations, "sample", model.Sample, "z", zcut)

	// 4. Map every pixel.
	mask, err := raster.NewMask(before.Grid)
	if err != nil {
		return err
	}
	defer mask.Close()
	outputs, err := pair.mapChange(ctx, g, o, dir, proj, model, zcut, mask, before)
	if err != nil {
		return err
	}

	// 5. Minimum mapping unit, the change map, areas and accuracy. The tile
	// buffers are garbage now: hand their pages back before the sieve and
	// the polygons take their share.
	debug.FreeOSMemory()
	if err := mask.SieveContext(ctx, minPixels); err != nil {
		return fmt.Errorf("sieve: %w", err)
	}
	sum := &changeSummary{Before: beforeArg, After: afterArg, Threshold: thresholdSummary{thr.String(), zcut},
		Components: k, Location: model.Location, Iterations: model.Iterations, Converged: model.Converged,
		SamplePixels: model.Sample, MinAreaPixels: minPixels, Basis: basisName, Aligned: aligned, Caution: caution,
		AreaNote: "mapped area of change (pixels flagged after the minimum mapping unit), not an estimate of the true area of change"}
	for i := range k {
		row := make([]float64, k)
		for j := range k {
			row[j] = model.Covariance.At(i, j)
		}
		sum.Covariance = append(sum.Covariance, row)
	}
	if err := writeChangeMap(ctx, o, dir, mask, before, areas, ref, sum); err != nil {
		return err
	}
	outputs = append([]string{"change.tif"}, outputs...)
	patches, err := mask.Patches(dir.path("changes.gpkg"), dir.path("magnitude.tif"), false)
	if err != nil {
		return err
	}
	sum.Patches = patches.Count
	outputs = append(outputs, "changes.gpkg")
	if err := writeChangePreview(g, o, dir, mask, after, areas, sum); err != nil {
		return err
	}
	outputs = append(outputs, "preview.png")
	outputs = append(outputs, "summary.json")
	for _, name := range outputs {
		sum.Outputs = append(sum.Outputs, filepath.Join(dir.final, name))
	}
	js, err := json.MarshalIndent(sum, "", "  ")
	if err != nil {
		return err
	}
	if err := os.WriteFile(dir.path("summary.json"), append(js, '\n'), 0o644); err != nil {
		return fmt.Errorf("write summary: %w", err)
	}
	if err := dir.commit(); err != nil {
		return err
	}
	reportChange(g, sum)
	return g.emit(sum)
}

// openAfter opens the AFTER stack, warped onto BEFORE's grid with --align
// when the grids differ.
func openAfter(g *globals, o *changeOptions, before *raster.Stack, arg string, opts []raster.Option) (*raster.Stack, bool, func(), error) {
	noop := func() {}
	paths := splitStack(arg)
	if len(paths) == 0 {
		return nil, false, noop, usagef("empty image argument %q", arg)
	}
	// Masks of AFTER are on BEFORE's grid, so open the files alone first.
	probe, err := raster.Open(paths)
	if err != nil {
		return nil, false, noop, err
	}
	gridErr := before.Grid.Compare(probe.Grid)
	if gridErr == nil {
		s, err := raster.Open(paths, opts...)
		return s, false, noop, err
	}
	if !o.align {
		return nil, false, noop, fmt.Errorf("%s is not on the grid of %s (%v); pass --align to warp it onto that grid", arg, strings.Join(before.Paths, ","), gridErr)
	}
	var vrts []string
	var cleanups []func()
	cleanup := func() {
		for _, c := range cleanups {
			c()
		}
	}
	for _, p := range paths {
		vrt, c, err := raster.AlignTo(p, before.Grid, o.resampling)
		if err != nil {
			cleanup()
			return nil, false, noop, err
		}
		vrts = append(vrts, vrt)
		cleanups = append(cleanups, c)
	}
	g.log.Warn("AFTER was warped onto BEFORE's grid: any misregistration between the dates shows up as change along edges", "after", arg, "resampling", o.resampling)
	s, err := raster.Open(vrts, opts...)
	if err != nil {
		cleanup()
		return nil, false, noop, err
	}
	return s, true, cleanup, nil
}

// readChangeBasis reads --basis and checks it against BEFORE's bands.
func readChangeBasis(path string, before *raster.Stack, beforeArg string) (*transform.Basis, error) {
	b, err := transform.ReadBasis(path)
	if err != nil {
		return nil, err
	}
	if err := checkBands(b, path, before, beforeArg, false); err != nil {
		return nil, err
	}
	return b, nil
}

// pooledBasis fits the basis on the pooled pixels valid on both dates; it
// keeps the fewest components reaching 99% of the variance, at least
// min(p, 3).
func pooledBasis(acc *bands.Accumulator, before, after *raster.Stack, beforeArg, afterArg string) (*transform.Basis, error) {
	what := beforeArg + " and " + afterArg + " (pixels valid on both dates)"
	b, err := fitBasis(acc, transform.Covariance, basisBands(before), what)
	if err != nil {
		return nil, err
	}
	b.Inputs = fingerprints([]*raster.Stack{before, after})
	p := len(b.Bands)
	b.Components = max(transform.ComponentsFor(b.Eigenvalues, 0.99), min(p, 3))
	return b, nil
}

// pairScan reads the same tiles of both dates.
type pairScan struct {
	before, after *scan
}

type pairReader struct {
	b, a  *readWorker
	valid []bool
}

func (ps *pairScan) newReader() *pairReader {
	return &pairReader{b: ps.before.newReadWorker(), a: ps.after.newReadWorker()}
}

// read returns both dates' pixels of tile k and the pixels valid on both.
func (r *pairReader) read(k int) (xb, xa []float64, valid []bool, count int, err error) {
	xb, vb, _, err := r.b.read(k)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	xa, va, _, err := r.a.read(k)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	if cap(r.valid) < len(vb) {
		r.valid = make([]bool, len(vb))
	}
	valid = r.valid[:len(vb)]
	for i := range valid {
		valid[i] = vb[i] && va[i]
		if valid[i] {
			count++
		}
	}
	return xb, xa, valid, count, nil
}

func (r *pairReader) Close() error {
	return errors.Join(r.b.Close(), r.a.Close())
}

// firstResult is what the first pass over both dates gathers.
type firstResult struct {
	acc    *bands.Accumulator // pooled co-moments, when fitting
	sample *change.Sampler    // band differences x_after - x_before
	valid  int64
}

type firstWorker struct {
	*pairReader
	p, size int
	fit     bool
	width   int64
	bound   *atomic.Uint64
	diff    []float64
}

func (w *firstWorker) Do(_ context.Context, t tiles.Tile) (firstResult, error) {
	xb, xa, valid, count, err := w.read(t.Index)
	if err != nil {
		return firstResult{}, err
	}
	res := firstResult{sample: change.NewSampler(w.size, w.p, 1), valid: int64(count)}
	if w.fit {
		res.acc = bands.NewAccumulator(w.p)
		res.acc.AddPixels(xb, valid)
		res.acc.AddPixels(xa, valid)
	}
	if len(w.diff) < w.p {
		w.diff = make([]float64, w.p)
	}
	// Pixels whose key is not below the sample's current bound can never
	// be kept: skipping them keeps the per-tile samples small.
	bound := w.bound.Load()
	for i, ok := range valid {
		if !ok {
			continue
		}
		index := int64(t.Y+i/t.W)*w.width + int64(t.X+i%t.W)
		if res.sample.Key(index) >= bound {
			continue
		}
		for j := range w.p {
			w.diff[j] = xa[i*w.p+j] - xb[i*w.p+j]
		}
		res.sample.Offer(index, w.diff)
	}
	return res, nil
}

// firstPass reads both dates once: it accumulates the pooled co-moments of
// the pixels valid on both (when fit is set) and draws a sample of at most
// size band differences, the same for any number of workers (the sampler
// keeps the pixels with the smallest hashes of their positions).
func (ps *pairScan) firstPass(ctx context.Context, g *globals, fit bool, size int) (firstResult, error) {
	p := ps.before.scenes[0].Len()
	total := firstResult{sample: change.NewSampler(size, p, 1)}
	if fit {
		total.acc = bands.NewAccumulator(p)
	}
	var bound atomic.Uint64
	bound.Store(total.sample.Bound())
	err := tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: g.workers, Progress: g.progress("statistics", ps.before.pixels())},
		func(int) (tiles.Worker[firstResult], error) {
			return &firstWorker{pairReader: ps.newReader(), p: p, size: size, fit: fit,
				width: int64(ps.before.scenes[0].Width), bound: &bound}, nil
		},
		func(_ tiles.Tile, r firstResult) error {
			if fit {
				total.acc.Merge(r.acc)
			}
			total.sample.Merge(r.sample)
			bound.Store(total.sample.Bound())
			total.valid += r.valid
			return nil
		})
	return total, err
}

// diffWorker computes score differences d = y_after - y_before of a tile.
type diffWorker struct {
	*pairReader
	proj   *transform.Projector
	yb, ya []float64
}

func (w *diffWorker) diff(k int, t tiles.Tile) ([]float64, []bool, int, error) {
	xb, xa, valid, count, err := w.read(k)
	if err != nil {
		return nil, nil, 0, err
	}
	n, kk := t.Pixels(), w.proj.Components()
	if cap(w.yb) < n*kk {
		w.yb, w.ya = make([]float64, n*kk), make([]float64, n*kk)
	}
	yb, ya := w.yb[:n*kk], w.ya[:n*kk]
	w.proj.Fold(yb, xb)
	w.proj.Fold(ya, xa)
	for i := range ya {
		ya[i] -= yb[i]
	}
	return ya, valid, count, nil
}

// mapTile is one tile of the change statistic.
type mapTile struct {
	z, pv, diffs []float64
	flags, top   []uint8
}

type mapWorker struct {
	*diffWorker
	model *change.Model
	sc    *change.Scorer
	zcut  float64
	diffs bool
	pool  *sync.Pool
}

func (w *mapWorker) Do(_ context.Context, t tiles.Tile) (*mapTile, error) {
	d, valid, _, err := w.diff(t.Index, t)
	if err != nil {
		return nil, err
	}
	n, k := t.Pixels(), w.proj.Components()
	mt := w.pool.Get().(*mapTile)
	grow := func(s []float64, n int) []float64 {
		if cap(s) < n {
			return make([]float64, n)
		}
		return s[:n]
	}
	mt.z, mt.pv = grow(mt.z, n), grow(mt.pv, n)
	if cap(mt.flags) < n {
		mt.flags, mt.top = make([]uint8, n), make([]uint8, n)
	}
	mt.flags, mt.top = mt.flags[:n], mt.top[:n]
	if w.diffs {
		mt.diffs = grow(mt.diffs, n*k)
	}
	for i := range n {
		px := d[i*k : i*k+k]
		if !valid[i] {
			mt.z[i], mt.pv[i], mt.flags[i], mt.top[i] = math.NaN(), math.NaN(), 255, 0
			if w.diffs {
				for c := range k {
					mt.diffs[i*k+c] = math.NaN()
				}
			}
			continue
		}
		z, top := w.sc.ZTop(px)
		mt.z[i], mt.pv[i], mt.top[i] = z, change.PValue(z, k), uint8(top+1)
		mt.flags[i] = 0
		if z > w.zcut {
			mt.flags[i] = 1
		}
		if w.diffs {
			w.sc.Centre(mt.diffs[i*k:i*k+k], px)
		}
	}
	return mt, nil
}

// mapChange computes Z, p-values and raw flags for every pixel: it writes
// magnitude.tif, pvalue.tif (and differences.tif) and fills mask.
func (ps *pairScan) mapChange(ctx context.Context, g *globals, o *changeOptions, dir *outDir, proj *transform.Projector, model *change.Model, zcut float64, mask *raster.ChangeMask, before *raster.Stack) ([]string, error) {
	nan := math.NaN()
	spec := func(desc string, bands int) raster.Spec {
		s := raster.Spec{Grid: before.Grid, Bands: bands, DataType: "Float32", NoData: &nan,
			Metadata: map[string]string{"BANDFOLD_VERSION": version, "BANDFOLD_CAUTION": caution}}
		for i := range bands {
			s.Descriptions = append(s.Descriptions, fmt.Sprintf(desc, i+1))
		}
		return s
	}
	k := proj.Components()
	mag, err := raster.Create(dir.path("magnitude.tif"), spec("change statistic Z (chi-square, %d)", 1))
	if err != nil {
		return nil, err
	}
	defer mag.Abort()
	mag.SetMetadata("BANDFOLD_Z_THRESHOLD", strconv.FormatFloat(zcut, 'g', -1, 64))
	pv, err := raster.Create(dir.path("pvalue.tif"), spec("no-change p-value (%d)", 1))
	if err != nil {
		return nil, err
	}
	defer pv.Abort()
	var diffs *raster.Output
	if o.differences {
		if diffs, err = raster.Create(dir.path("differences.tif"), spec("PC%d score difference minus no-change location", k)); err != nil {
			return nil, err
		}
		defer diffs.Abort()
	}
	pool := &sync.Pool{New: func() any { return &mapTile{} }}
	err = tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: g.workers, Progress: g.progress("map", ps.before.pixels())},
		func(int) (tiles.Worker[*mapTile], error) {
			return &mapWorker{diffWorker: &diffWorker{pairReader: ps.newReader(), proj: proj.Clone()},
				model: model, sc: model.Scorer(), zcut: zcut, diffs: o.differences, pool: pool}, nil
		},
		func(t tiles.Tile, mt *mapTile) error {
			defer pool.Put(mt)
			if err := mag.Write(t, mt.z); err != nil {
				return err
			}
			if err := pv.Write(t, mt.pv); err != nil {
				return err
			}
			if diffs != nil {
				if err := diffs.Write(t, mt.diffs); err != nil {
					return err
				}
			}
			return mask.Write(t.X, t.Y, t.W, t.H, mt.flags, mt.top)
		})
	if err != nil {
		return nil, err
	}
	outs := []string{"magnitude.tif", "pvalue.tif"}
	for _, out := range []*raster.Output{mag, pv, diffs} {
		if out != nil {
			if err := out.Commit(); err != nil {
				return nil, err
			}
		}
	}
	if diffs != nil {
		outs = append(outs, "differences.tif")
	}
	return outs, nil
}

// changeColors is change.tif's colour table: no change, change, nodata.
var changeColors = func() [][4]int16 {
	ct := make([][4]int16, 256)
	ct[0] = [4]int16{236, 236, 228, 255}
	ct[1] = [4]int16{214, 40, 120, 255}
	ct[255] = [4]int16{0, 0, 0, 0}
	return ct
}()

// writeChangeMap writes change.tif from the sieved mask and counts the
// mapped change, its ground area and, with a reference, the agreement.
func writeChangeMap(ctx context.Context, o *changeOptions, dir *outDir, mask *raster.ChangeMask, before *raster.Stack, areas *raster.CellAreas, ref *raster.Reference, sum *changeSummary) error {
	nd := 255.0
	out, err := raster.Create(dir.path("change.tif"), raster.Spec{Grid: before.Grid, Bands: 1, DataType: "Byte", NoData: &nd,
		ColorTable: changeColors, Descriptions: []string{"change (1), no change (0), nodata (255)"},
		Metadata: map[string]string{"BANDFOLD_VERSION": version, "BANDFOLD_CAUTION": caution, "BANDFOLD_THRESHOLD": sum.Threshold.Rule}})
	if err != nil {
		return err
	}
	defer out.Abort()
	var acc *accuracy
	if ref != nil {
		acc = &accuracy{File: o.reference}
	}
	area := 0.0
	tg := grid(before, o.input.tile)
	var flags, refBuf []uint8
	var vals []float64
	for t := range tg.Tiles() {
		if err := ctx.Err(); err != nil {
			return err
		}
		n := t.Pixels()
		if cap(flags) < n {
			flags, refBuf, vals = make([]uint8, n), make([]uint8, n), make([]float64, n)
		}
		flags, refBuf, vals = flags[:n], refBuf[:n], vals[:n]
		if err := mask.Read(t.X, t.Y, t.W, t.H, flags); err != nil {
			return err
		}
		if ref != nil {
			if err := ref.Read(t.X, t.Y, t.W, t.H, refBuf); err != nil {
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
				if areas != nil {
					area += areas.At(t.X+i%t.W, t.Y+i/t.W)
				}
			}
			if ref != nil && refBuf[i] != 255 {
				switch {
				case f == 1 && refBuf[i] == 1:
					acc.TruePositive++
				case f == 1:
					acc.FalsePositive++
				case refBuf[i] == 1:
					acc.FalseNegative++
				default:
					acc.TrueNegative++
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
	if areas != nil {
		ha := area / 1e4
		sum.ChangedAreaM2, sum.ChangedAreaHa = &area, &ha
	}
	if acc != nil {
		acc.finish()
		sum.Reference = acc
	}
	return nil
}

// reportChange prints the summary table on stderr.
func reportChange(g *globals, s *changeSummary) {
	if g.quiet {
		return
	}
	w := g.stderr
	fmt.Fprintf(w, "change between %s and %s (%d components, threshold %s at Z = %.4g)\n", s.Before, s.After, s.Components, s.Threshold.Rule, s.Threshold.Z)
	fmt.Fprintf(w, "  %-28s %d\n", "valid pixels", s.ValidPixels)
	fmt.Fprintf(w, "  %-28s %d (%.4f of valid)\n", "changed pixels", s.ChangedPixels, s.ChangedFrac)
	if s.ChangedAreaHa != nil {
		fmt.Fprintf(w, "  %-28s %.2f ha (%.0f m2)\n", "mapped area of change", *s.ChangedAreaHa, *s.ChangedAreaM2)
	}
	fmt.Fprintf(w, "  %-28s %d (min mapping unit %d px)\n", "change patches", s.Patches, s.MinAreaPixels)
	fmt.Fprintf(w, "  %-28s %d iterations on %d sampled pixels\n", "no-change model", s.Iterations, s.SamplePixels)
	if r := s.Reference; r != nil {
		fmt.Fprintf(w, "  against %s: recall %.3f, precision %.3f, F1 %.3f, overall accuracy %.4f, false alarms %.4f of unchanged\n",
			r.File, r.Recall, r.Precision, r.F1, r.OverallAccuracy, r.FalseAlarmRate)
		fmt.Fprintf(w, "    confusion: TP %d  FP %d  FN %d  TN %d\n", r.TruePositive, r.FalsePositive, r.FalseNegative, r.TrueNegative)
	}
	for _, p := range s.Outputs {
		fmt.Fprintf(w, "  wrote %s\n", p)
	}
	fmt.Fprintf(w, "note: %s\n", caution)
}
