package main

import (
	"bufio"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/spf13/cobra"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

type foldOptions struct {
	input       inputFlags
	basis       string
	out         string
	outDir      string
	name        string
	list        string
	components  int
	format      string
	dtype       string
	ignoreNames bool
	co          []string
	overwrite   bool
	preview     string
	shard       string
	shardCount  int
}

func newFoldCommand(g *globals) *cobra.Command {
	o := &foldOptions{}
	cmd := &cobra.Command{
		Use:   "fold IMAGE... --basis BASIS.json (--out COMPONENTS.tif | --out-dir DIR)",
		Short: "Write component images: the scores of every pixel on the kept components",
		Long: `fold projects every valid pixel onto the leading components of a basis,
y = W_k^T ((x - mean) / s), tile by tile in parallel, and writes the scores as
a georeferenced raster. Invalid pixels become nodata.

With a basis fitted on another scene, fold reports the share of this scene's
variance the kept components explain next to the share on the fitting scene;
a large drop means the basis no longer fits and should be refitted.

Many scenes (arguments, --list, or a glob) go to --out-dir, named by --name.
Outputs that already exist and are complete are skipped, so a rerun after a
crash finishes only what is missing; a failing scene is reported and the rest
go on. --shard I/N (or auto, from a Slurm array or Kubernetes Indexed Job)
takes every N-th scene of the list.`,
		Example: `  bandfold fold cube.tif --basis cube.basis.json --out cube.components.tif --type int16
  bandfold fold scenes/*.tif --basis ref.basis.json --out-dir components --json
  bandfold fold --list scenes.txt --basis ref.basis.json --out-dir components --shard auto`,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runFold(cmd.Context(), g, o, args)
		},
	}
	f := cmd.Flags()
	o.input.register(f)
	f.StringVarP(&o.basis, "basis", "b", "", "basis file from learn or merge")
	f.StringVarP(&o.out, "out", "o", "", "component image to write (one input)")
	f.StringVar(&o.outDir, "out-dir", "", "folder for the component images of many inputs")
	f.StringVar(&o.name, "name", "{stem}.components.tif", "output name in --out-dir; {stem} is the input file name without extension")
	f.StringVar(&o.list, "list", "", "file with one input path per line")
	f.IntVarP(&o.components, "components", "k", 0, "number of components (default: the basis's chosen k)")
	f.StringVar(&o.format, "format", "gtiff", "gtiff or cog")
	f.StringVar(&o.dtype, "type", "float32", "float32, float64, or int16 (scaled per component: the compact form)")
	f.BoolVar(&o.ignoreNames, "ignore-band-names", false, "accept bands named differently from the basis's if they match in order")
	f.StringArrayVar(&o.co, "co", nil, "GDAL creation option KEY=VALUE (repeatable)")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace existing outputs")
	f.StringVar(&o.preview, "preview", "", "also write an RGB quicklook PNG of components 1-3 (2-98% stretch)")
	f.StringVar(&o.shard, "shard", "", `process only scenes I, I+N, ... of the list ("I/N", or "auto")`)
	f.IntVar(&o.shardCount, "shard-count", 0, "number of shards for --shard auto in a Kubernetes Indexed Job")
	cmd.MarkFlagRequired("basis")
	cmd.MarkFlagsMutuallyExclusive("out", "out-dir")
	cmd.MarkFlagsOneRequired("out", "out-dir")
	return cmd
}

// foldResult is the JSON summary of one scene.
type foldResult struct {
	Input          string  `json:"input"`
	Output         string  `json:"output"`
	Status         string  `json:"status"` // written, skipped or failed
	Error          string  `json:"error,omitempty"`
	Pixels         int64   `json:"pixels,omitempty"`
	Components     int     `json:"components,omitempty"`
	Type           string  `json:"type,omitempty"`
	ExplainedFit   float64 `json:"explained_fit,omitempty"`
	ExplainedScene float64 `json:"explained_scene,omitempty"`
	Seconds        float64 `json:"seconds"`
}

// foldBatchSummary is the final JSON line of a batch.
type foldBatchSummary struct {
	Scenes          int     `json:"scenes"`
	Written         int     `json:"written"`
	Skipped         int     `json:"skipped"`
	Failed          int     `json:"failed"`
	Shard           string  `json:"shard"`
	Seconds         float64 `json:"seconds"`
	ScenesPerMinute float64 `json:"scenes_per_minute"`
}

// foldJob is what every scene of a run shares.
type foldJob struct {
	basis  *transform.Basis
	path   string
	proj   *transform.Projector
	k      int
	dtype  string
	format raster.Format
	opts   []raster.Option
}

func runFold(ctx context.Context, g *globals, o *foldOptions, args []string) error {
	job, inputs, sh, err := o.prepare(args)
	if err != nil {
		return err
	}
	if o.out != "" {
		if o.preview != "" {
			if err := raster.CheckTarget(o.preview, o.overwrite); err != nil {
				return err
			}
		}
		res, err := foldScene(ctx, g, o, job, inputs[0], o.out)
		if err != nil {
			return err
		}
		if o.preview != "" {
			if err := foldPreview(o.out, o.preview); err != nil {
				return err
			}
			g.info("  quicklook %s", o.preview)
		}
		return g.emit(res)
	}
	return foldBatch(ctx, g, o, job, inputs, sh)
}

// prepare checks the command line and reads the basis.
func (o *foldOptions) prepare(args []string) (*foldJob, []string, shard, error) {
	format, err := raster.ParseFormat(o.format)
	if err != nil {
		return nil, nil, shard{}, usageError{err}
	}
	types := map[string]string{"float32": "Float32", "float64": "Float64", "int16": "Int16"}
	dtype, ok := types[strings.ToLower(o.dtype)]
	if !ok {
		return nil, nil, shard{}, usagef("--type %q: want float32, float64 or int16", o.dtype)
	}
	if o.components < 0 {
		return nil, nil, shard{}, usagef("--components %d: must be positive", o.components)
	}
	sh, err := parseShard(o.shard, o.shardCount, environ)
	if err != nil {
		return nil, nil, shard{}, err
	}
	inputs, err := collectInputs(args, o.list)
	if err != nil {
		return nil, nil, shard{}, err
	}
	switch {
	case len(inputs) == 0:
		return nil, nil, shard{}, usagef("no input image (give IMAGE arguments or --list)")
	case o.out != "" && len(inputs) > 1:
		return nil, nil, shard{}, usagef("--out takes one input; use --out-dir for %d inputs", len(inputs))
	case o.out != "" && sh.N > 1:
		return nil, nil, shard{}, usagef("--shard applies to batches: use --out-dir")
	case o.preview != "" && o.out == "":
		return nil, nil, shard{}, usagef("--preview goes with --out (one input)")
	case o.preview != "" && raster.IsVirtual(o.preview):
		return nil, nil, shard{}, usagef("--preview %s: write the PNG to a local path", o.preview)
	case o.outDir != "" && !strings.Contains(o.name, "{stem}"):
		return nil, nil, shard{}, usagef("--name %q must contain {stem} so that scenes do not overwrite each other", o.name)
	}
	opts, err := o.input.options()
	if err != nil {
		return nil, nil, shard{}, err
	}
	b, err := transform.ReadBasis(o.basis)
	if err != nil {
		return nil, nil, shard{}, err
	}
	k := b.Components
	if o.components > 0 {
		k = o.components
	}
	if k > len(b.Bands) {
		return nil, nil, shard{}, usagef("--components %d: the basis %s has %d components", k, o.basis, len(b.Bands))
	}
	proj, err := transform.NewProjector(b, k)
	if err != nil {
		return nil, nil, shard{}, fmt.Errorf("basis %s: %w", o.basis, err)
	}
	return &foldJob{basis: b, path: o.basis, proj: proj, k: k, dtype: dtype, format: format, opts: opts}, inputs, sh, nil
}

// collectInputs gathers input images from arguments (globs expanded when
// they match files) and a list file.
func collectInputs(args []string, list string) ([]string, error) {
	var out []string
	for _, a := range args {
		if strings.ContainsAny(a, "*?[") && !raster.IsVirtual(a) {
			if _, err := os.Stat(a); err != nil {
				matches, err := filepath.Glob(a)
				if err != nil {
					return nil, usagef("bad pattern %q: %v", a, err)
				}
				if len(matches) == 0 {
					return nil, fmt.Errorf("%s: no file matches", a)
				}
				out = append(out, matches...)
				continue
			}
		}
		out = append(out, a)
	}
	if list != "" {
		f, err := os.Open(list)
		if err != nil {
			return nil, fmt.Errorf("list %s: %w", list, errors.Unwrap(err))
		}
		defer f.Close()
		sc := bufio.NewScanner(f)
		for sc.Scan() {
			if line := strings.TrimSpace(sc.Text()); line != "" && !strings.HasPrefix(line, "#") {
				out = append(out, line)
			}
		}
		if err := sc.Err(); err != nil {
			return nil, fmt.Errorf("list %s: %w", list, err)
		}
	}
	return out, nil
}

// outputName applies the name template to an input.
func outputName(dir, template, input string) string {
	first := splitStack(input)[0]
	return filepath.Join(dir, strings.ReplaceAll(template, "{stem}", raster.Stem(first)))
}

func foldBatch(ctx context.Context, g *globals, o *foldOptions, job *foldJob, inputs []string, sh shard) error {
	if fi, err := os.Stat(o.outDir); err != nil || !fi.IsDir() {
		return fmt.Errorf("output folder %s does not exist", o.outDir)
	}
	if err := checkWritable(o.outDir); err != nil {
		return err
	}
	start := time.Now()
	sum := foldBatchSummary{Shard: sh.String()}
	seen := map[string]string{}
	for i, in := range inputs {
		if i%sh.N != sh.I {
			continue
		}
		out := outputName(o.outDir, o.name, in)
		if prev, dup := seen[out]; dup {
			return usagef("%s and %s would both be written to %s; change --name", prev, in, out)
		}
		seen[out] = in
	}
	for i, in := range inputs {
		if i%sh.N != sh.I {
			continue
		}
		if ctx.Err() != nil {
			return ctx.Err()
		}
		sum.Scenes++
		out := outputName(o.outDir, o.name, in)
		res, err := foldScene(ctx, g, o, job, in, out)
		switch {
		case errors.Is(err, context.Canceled):
			return err
		case err != nil:
			res = foldResult{Input: in, Output: out, Status: "failed", Error: strings.ReplaceAll(err.Error(), "\n", "; ")}
			sum.Failed++
			fmt.Fprintf(g.stderr, "bandfold: %s: %s\n", in, res.Error)
		case res.Status == "skipped":
			sum.Skipped++
		default:
			sum.Written++
		}
		if err := g.emit(res); err != nil {
			return err
		}
	}
	sum.Seconds = time.Since(start).Seconds()
	if sum.Seconds > 0 {
		sum.ScenesPerMinute = float64(sum.Written) / sum.Seconds * 60
	}
	g.info("batch %s: %d scenes, %d written, %d skipped (already complete), %d failed, %.1f s", sh, sum.Scenes, sum.Written, sum.Skipped, sum.Failed, sum.Seconds)
	if err := g.emit(sum); err != nil {
		return err
	}
	if sum.Failed > 0 {
		return errBatchFailed
	}
	return nil
}

// checkWritable makes sure files can be created in dir.
func checkWritable(dir string) error {
	f, err := os.CreateTemp(dir, ".bandfold-write-check-*")
	if err != nil {
		return fmt.Errorf("output folder %s is not writable: %w", dir, errors.Unwrap(err))
	}
	f.Close()
	return os.Remove(f.Name())
}

// completionRecord identifies a finished component image: the basis, the
// inputs (path, size, time), the components and the type. A rerun skips an
// output whose record matches.
func completionRecord(job *foldJob, s *raster.Stack) string {
	h := sha256.New()
	for _, fp := range fingerprints([]*raster.Stack{s}) {
		fmt.Fprintf(h, "%s|%d|%s\n", fp.Path, fp.Size, fp.ModTime.Format(time.RFC3339Nano))
	}
	return fmt.Sprintf("basis=%s inputs=%s components=%d type=%s", job.basis.Fingerprint(), hex.EncodeToString(h.Sum(nil))[:16], job.k, job.dtype)
}

const completeKey = "BANDFOLD_COMPLETE"

// checkBands requires the image's bands to match the basis's.
func checkBands(b *transform.Basis, basisPath string, s *raster.Stack, image string, ignoreNames bool) error {
	if s.Len() != len(b.Bands) {
		return fmt.Errorf("%s has %d bands but the basis %s has %d", image, s.Len(), basisPath, len(b.Bands))
	}
	if ignoreNames {
		return nil
	}
	var have, want []string
	differ := false
	for i, band := range s.Bands {
		have = append(have, band.Name)
		want = append(want, b.Bands[i].Name)
		// Names made up from the file name ("scene:3") say nothing about
		// the band, so they are not compared.
		if !autoNamed(band.Name, band.Path, band.Index) && !autoNamed(b.Bands[i].Name, b.Bands[i].Source, b.Bands[i].Index) {
			differ = differ || band.Name != b.Bands[i].Name
		}
	}
	if differ {
		return fmt.Errorf("%s has bands [%s] but the basis %s has [%s]; if they match in order, pass --ignore-band-names",
			image, strings.Join(have, ", "), basisPath, strings.Join(want, ", "))
	}
	return nil
}

// foldScene folds one image into out.
func foldScene(ctx context.Context, g *globals, o *foldOptions, job *foldJob, input, out string) (foldResult, error) {
	start := time.Now()
	res := foldResult{Input: input, Output: out, Components: job.k, Type: job.dtype}
	s, err := openImage(input, job.opts)
	if err != nil {
		return res, err
	}
	if err := checkBands(job.basis, job.path, s, input, o.ignoreNames); err != nil {
		return res, err
	}
	record := completionRecord(job, s)
	if !o.overwrite {
		if md, err := raster.ReadMetadata(out); err == nil && md[completeKey] == record {
			res.Status = "skipped"
			g.info("%s: complete, skipped", out)
			return res, nil
		}
	}
	raster.RemoveStale(out)
	spec := foldSpec(job, s, o)
	sc := newScan([]*raster.Stack{s}, o.input.tile, 1, 0, 1)
	output, err := raster.Create(out, spec)
	if err != nil {
		return res, err
	}
	defer output.Abort()

	p := s.Len()
	xs, ys := bands.NewMoments(p), bands.NewMoments(job.k)
	pool := &sync.Pool{New: func() any { return &foldTile{x: bands.NewMoments(p), y: bands.NewMoments(job.k)} }}
	err = tiles.Run(ctx, sc.runTiles(), tiles.Options{Workers: g.workers, Progress: g.progress("fold", sc.pixels())},
		func(int) (tiles.Worker[*foldTile], error) {
			return &foldWorker{readWorker: sc.newReadWorker(), job: job, spec: &spec, proj: job.proj.Clone(), pool: pool}, nil
		},
		func(t tiles.Tile, ft *foldTile) error {
			err := output.Write(t, ft.out)
			xs.Merge(ft.x)
			ys.Merge(ft.y)
			pool.Put(ft)
			return err
		})
	if err != nil {
		return res, err
	}
	if xs.Count() == 0 {
		return res, fmt.Errorf("no valid pixels in %s after nodata and mask", input)
	}
	res.Pixels = int64(xs.Count())
	res.ExplainedFit = transform.Cumulative(job.basis.Eigenvalues)[job.k-1]
	res.ExplainedScene = explainedScene(job.basis, xs, ys)
	if err := output.SetMetadata(completeKey, record); err != nil {
		return res, err
	}
	if err := output.Commit(); err != nil {
		return res, err
	}
	res.Status = "written"
	res.Seconds = time.Since(start).Seconds()
	g.info("%s: %d components of %d bands, %d valid pixels, %.1f s", out, job.k, p, res.Pixels, res.Seconds)
	g.info("  variance explained by the kept components: %.4f on the fitting scene, %.4f on this scene", res.ExplainedFit, res.ExplainedScene)
	if res.ExplainedScene < res.ExplainedFit-0.05 {
		g.info("  warning: %.1f points less than on the fitting scene: the basis may no longer fit this scene; consider refitting it (bandfold learn)", 100*(res.ExplainedFit-res.ExplainedScene))
	}
	return res, nil
}

// explainedScene is the share of the scene's total variance, in the basis's
// scaling and about the scene's own mean, carried by the kept components:
// sum_i var(y_i) / sum_j var(x_j) / s_j^2.
func explainedScene(b *transform.Basis, xs, ys *bands.Moments) float64 {
	total := 0.0
	for j, v := range xs.Variance(nil) {
		s := 1.0
		if b.Mode == transform.Correlation {
			s = b.StdDev[j]
		}
		total += v / (s * s)
	}
	kept := 0.0
	for _, v := range ys.Variance(nil) {
		kept += v
	}
	if total == 0 {
		return math.NaN()
	}
	return kept / total
}

// foldSpec describes the component image.
func foldSpec(job *foldJob, s *raster.Stack, o *foldOptions) raster.Spec {
	explained := transform.Explained(job.basis.Eigenvalues)
	spec := raster.Spec{Grid: s.Grid, Bands: job.k, DataType: job.dtype, Format: job.format,
		CreationOptions: o.co, Overwrite: o.overwrite}
	var eig []string
	for i := range job.k {
		spec.Descriptions = append(spec.Descriptions, fmt.Sprintf("PC%d (%.2f%% of variance)", i+1, 100*explained[i]))
		eig = append(eig, strconv.FormatFloat(job.basis.Eigenvalues[i], 'g', -1, 64))
	}
	nd := math.NaN()
	if job.dtype == "Int16" {
		nd = float64(transform.Int16NoData)
		for i := range job.k {
			scale, offset := job.basis.Int16Scaling(i)
			spec.Scales = append(spec.Scales, scale)
			spec.Offsets = append(spec.Offsets, offset)
		}
	}
	spec.NoData = &nd
	spec.Metadata = map[string]string{
		"BANDFOLD_BASIS":       job.basis.Fingerprint(),
		"BANDFOLD_BASIS_FILE":  filepath.Base(job.path),
		"BANDFOLD_MODE":        string(job.basis.Mode),
		"BANDFOLD_EIGENVALUES": strings.Join(eig, ","),
		"BANDFOLD_COMPONENTS":  strconv.Itoa(job.k),
		"BANDFOLD_VERSION":     version,
	}
	return spec
}

// foldTile is one tile's result: the values to write and the moments of
// its valid pixels.
type foldTile struct {
	out  []float64
	x, y *bands.Moments
}

type foldWorker struct {
	*readWorker
	job  *foldJob
	spec *raster.Spec
	proj *transform.Projector
	pool *sync.Pool
}

func (w *foldWorker) Do(_ context.Context, t tiles.Tile) (*foldTile, error) {
	x, valid, _, err := w.read(t.Index)
	if err != nil {
		return nil, err
	}
	ft := w.pool.Get().(*foldTile)
	k := w.job.k
	n := t.Pixels()
	if cap(ft.out) < n*k {
		ft.out = make([]float64, n*k)
	}
	ft.out = ft.out[:n*k]
	w.proj.Fold(ft.out, x)
	ft.x.Reset()
	ft.y.Reset()
	ft.x.AddPixels(x, valid)
	ft.y.AddPixels(ft.out, valid)
	nd := *w.spec.NoData
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
				px[c] = float64(transform.QuantizeInt16(v, w.spec.Scales[c], w.spec.Offsets[c]))
			}
		}
	}
	return ft, nil
}

// autoNamed reports whether name is the "<file stem>:<band>" name given to a
// band without a description.
func autoNamed(name, path string, index int) bool {
	return name == fmt.Sprintf("%s:%d", raster.Stem(path), index)
}

// foldPreview writes an RGB quicklook of components 1-3 of a component image.
func foldPreview(components, png string) error {
	s, err := raster.Open([]string{components})
	if err != nil {
		return err
	}
	img, _, err := composite(s, [3]int{0, min(1, s.Len()-1), min(2, s.Len()-1)})
	if err != nil {
		return err
	}
	return figures.WritePNG(png, img)
}
