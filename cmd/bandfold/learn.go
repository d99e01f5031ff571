package main

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/spf13/cobra"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/transform"
)

type learnOptions struct {
	input      inputFlags
	out        string
	partial    string
	mode       string
	components int
	variance   float64
	stride     int
	shard      string
	shardCount int
	overwrite  bool
}

func newLearnCommand(g *globals) *cobra.Command {
	o := &learnOptions{}
	cmd := &cobra.Command{
		Use:   "learn IMAGE... (--out BASIS.json | --partial PART.json)",
		Short: "Fit a principal component basis from one or more scenes",
		Long: `learn accumulates the band covariance of the images tile by tile in bounded
memory, decomposes it, and writes the basis file every other command uses.
Several IMAGE arguments are pooled scenes with the same bands.

With --shard I/N --partial FILE, only every N-th tile (starting at I) is read
and the un-decomposed statistics are written for "bandfold merge".`,
		Example: `  bandfold learn cube.tif --out cube.basis.json --variance 0.995
  bandfold learn 2025.tif 2026.tif --bands 1-6 --mode correlation --out pooled.basis.json
  bandfold learn scene.tif --shard 0/4 --partial part0.json`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runLearn(cmd.Context(), g, o, args)
		},
	}
	f := cmd.Flags()
	o.input.register(f)
	f.StringVarP(&o.out, "out", "o", "", "basis file to write (JSON)")
	f.StringVar(&o.partial, "partial", "", "write the shard's un-decomposed statistics to this file instead of a basis")
	f.StringVar(&o.mode, "mode", "covariance", "covariance or correlation (standardised bands)")
	f.IntVarP(&o.components, "components", "k", 0, "number of components to keep (overrides --variance)")
	f.Float64Var(&o.variance, "variance", 0.99, "keep the fewest components whose cumulative share of variance reaches this fraction")
	f.IntVar(&o.stride, "stride", 1, "fit on every N-th row and column only")
	f.StringVar(&o.shard, "shard", "", `process only shard I of N ("I/N", or "auto" from a Slurm array or Kubernetes Indexed Job)`)
	f.IntVar(&o.shardCount, "shard-count", 0, "number of shards for --shard auto in a Kubernetes Indexed Job")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace an existing output")
	cmd.MarkFlagsMutuallyExclusive("out", "partial")
	cmd.MarkFlagsOneRequired("out", "partial")
	return cmd
}

func (o *learnOptions) validate() (transform.Mode, shard, error) {
	mode, err := transform.ParseMode(o.mode)
	if err != nil {
		return "", shard{}, usageError{err}
	}
	if o.components < 0 {
		return "", shard{}, usagef("--components %d: must be positive", o.components)
	}
	if err := transform.ValidateFraction(o.variance); err != nil {
		return "", shard{}, usagef("--variance %v: must be in (0, 1]", o.variance)
	}
	if o.stride < 1 {
		return "", shard{}, usagef("--stride %d: must be at least 1", o.stride)
	}
	sh, err := parseShard(o.shard, o.shardCount, environ)
	if err != nil {
		return "", shard{}, err
	}
	if sh.N > 1 && o.partial == "" {
		return "", shard{}, usagef("--shard needs --partial: a shard sees only part of the image, so it cannot write a basis")
	}
	return mode, sh, nil
}

func runLearn(ctx context.Context, g *globals, o *learnOptions, args []string) error {
	mode, sh, err := o.validate()
	if err != nil {
		return err
	}
	target := o.out
	if o.partial != "" {
		target = o.partial
	}
	if err := raster.CheckTarget(target, o.overwrite); err != nil {
		return err
	}
	opts, err := o.input.options()
	if err != nil {
		return err
	}
	scenes := make([]*raster.Stack, len(args))
	for i, a := range args {
		if scenes[i], err = openImage(a, opts); err != nil {
			return err
		}
	}
	if err := checkBandCounts(scenes); err != nil {
		return err
	}
	p := scenes[0].Len()
	if p < 2 {
		return fmt.Errorf("%s has 1 band: principal components need at least 2", describeScenes(scenes))
	}
	if o.components > p {
		return usagef("--components %d: the images have only %d bands", o.components, p)
	}

	sc := newScan(scenes, o.input.tile, o.stride, sh.I, sh.N)
	g.log.Debug("learn", "scenes", len(scenes), "bands", p, "tiles", len(sc.jobs), "shard", sh.String())
	acc, err := sc.moments(ctx, g)
	if err != nil {
		return err
	}
	if o.partial != "" {
		part := &transform.Partial{
			Format: transform.PartialFormat, Version: 1, Created: time.Now().UTC(),
			Shard: sh.I, Shards: sh.N, TileSize: o.input.tile, Stride: o.stride,
			Mode: mode, Bands: basisBands(scenes[0]), Inputs: fingerprints(scenes),
			State: acc.State(), Tool: version,
		}
		if err := part.WriteFile(o.partial); err != nil {
			return err
		}
		g.info("wrote partial statistics of shard %s (%.0f pixels) to %s", sh, acc.Count(), o.partial)
		return g.emit(map[string]any{"partial": o.partial, "shard": sh.String(), "pixels": int64(acc.Count()), "bands": p})
	}
	b, err := fitBasis(acc, mode, basisBands(scenes[0]), describeScenes(scenes))
	if err != nil {
		return err
	}
	b.Stride = o.stride
	b.Inputs = fingerprints(scenes)
	choose(b, o.components, o.variance)
	if err := b.WriteFile(o.out); err != nil {
		return err
	}
	return reportBasis(g, b, o.out)
}

// fitBasis checks the accumulated statistics and decomposes them. what names
// the inputs for error messages.
func fitBasis(acc *bands.Accumulator, mode transform.Mode, info []transform.Band, what string) (*transform.Basis, error) {
	p := acc.Bands()
	n := acc.Count()
	switch {
	case n == 0:
		return nil, fmt.Errorf("no valid pixels in %s after nodata and mask", what)
	case n < float64(p+1):
		return nil, fmt.Errorf("only %.0f valid pixels in %s for %d bands: need at least bands + 1", n, what, p)
	}
	if mode == transform.Correlation {
		if _, err := acc.Correlation(nil); err != nil {
			var zv *bands.ZeroVarianceError
			if errors.As(err, &zv) {
				return nil, fmt.Errorf("band %q of %s is constant over the valid pixels, so correlation mode cannot standardise it; leave it out with --bands", info[zv.Band].Name, what)
			}
			return nil, err
		}
	}
	mins, maxs := acc.Min(nil), acc.Max(nil)
	for i := range info {
		info[i].Min, info[i].Max = mins[i], maxs[i]
	}
	b, err := transform.NewBasis(mode, info, int64(n), acc.Mean(nil), acc.Covariance(nil))
	if err != nil {
		return nil, fmt.Errorf("fit basis on %s: %w", what, err)
	}
	b.Tool = version
	return b, nil
}

// basisSummary is the JSON summary of a basis (learn, merge, inspect).
type basisSummary struct {
	Basis       string    `json:"basis,omitempty"`
	Pixels      int64     `json:"pixels"`
	Bands       int       `json:"bands"`
	BandNames   []string  `json:"band_names"`
	Mode        string    `json:"mode"`
	Eigenvalues []float64 `json:"eigenvalues"`
	Explained   []float64 `json:"explained"`
	Cumulative  []float64 `json:"cumulative"`
	Components  int       `json:"components"`
	BrokenStick int       `json:"broken_stick"`
	Kaiser      *int      `json:"eigenvalue_above_one,omitempty"`
}

func summarizeBasis(b *transform.Basis, path string) basisSummary {
	s := basisSummary{
		Basis: path, Pixels: b.Pixels, Bands: len(b.Bands), Mode: string(b.Mode),
		Eigenvalues: b.Eigenvalues, Explained: transform.Explained(b.Eigenvalues),
		Cumulative: transform.Cumulative(b.Eigenvalues), Components: b.Components,
		BrokenStick: transform.BrokenStick(b.Eigenvalues),
	}
	for _, band := range b.Bands {
		s.BandNames = append(s.BandNames, band.Name)
	}
	if b.Mode == transform.Correlation {
		k := transform.KaiserCount(b.Eigenvalues)
		s.Kaiser = &k
	}
	return s
}

// reportBasis prints the variance table on stderr and the JSON summary on
// stdout with --json.
func reportBasis(g *globals, b *transform.Basis, path string) error {
	s := summarizeBasis(b, path)
	if !g.quiet {
		w := g.stderr
		if path != "" {
			fmt.Fprintf(w, "basis %s: %d bands, %d pixels, %s mode\n", path, s.Bands, s.Pixels, s.Mode)
		}
		fmt.Fprintf(w, "%4s | %14s | %12s | %8s | %9s | %12s\n", "pc", "eigenvalue", "sd", "share", "cum_share", "broken_stick")
		stick := brokenStickShares(len(b.Eigenvalues))
		// Long tables (hyperspectral bases) stop after the kept components
		// and a few more, unless --verbose.
		rows := len(b.Eigenvalues)
		if !g.verbose {
			rows = min(rows, max(b.Components+5, 10))
		}
		for i, v := range b.Eigenvalues[:rows] {
			mark := " "
			if i < b.Components {
				mark = "*"
			}
			fmt.Fprintf(w, "%3d%s | %14.6g | %12.6g | %8.5f | %9.5f | %12.5f\n", i+1, mark, v, math.Sqrt(max(v, 0)), s.Explained[i], s.Cumulative[i], stick[i])
		}
		if rows < len(b.Eigenvalues) {
			fmt.Fprintf(w, "%4s | (%d more components, %.5f of the variance; --verbose lists them)\n", "...", len(b.Eigenvalues)-rows, 1-s.Cumulative[rows-1])
		}
		fmt.Fprintf(w, "kept (*): %d components, %.4f of the variance; broken-stick rule keeps %d", s.Components, s.Cumulative[s.Components-1], s.BrokenStick)
		if s.Kaiser != nil {
			fmt.Fprintf(w, "; eigenvalue > 1 keeps %d", *s.Kaiser)
		}
		fmt.Fprintln(w)
	}
	return g.emit(s)
}

// choose sets the number of kept components: k when given, else the fewest
// whose cumulative share of variance reaches fraction.
func choose(b *transform.Basis, k int, fraction float64) {
	if k == 0 {
		k = transform.ComponentsFor(b.Eigenvalues, fraction)
	}
	b.Components = k
}

// brokenStickShares returns the expected shares of the broken-stick model
// for p components (Jackson 1993): b_k = (1/p) sum_{i=k}^{p} 1/i.
func brokenStickShares(p int) []float64 {
	out := make([]float64, p)
	sum := 0.0
	for k := p; k >= 1; k-- {
		sum += 1 / float64(k)
		out[k-1] = sum / float64(p)
	}
	return out
}
