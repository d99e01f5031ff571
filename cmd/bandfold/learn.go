package main

import (
	"context"
	"fmt"
	"math"
	"os"

	"github.com/spf13/cobra"

	"bandfold/cmd/bandfold/internal/job"
	"bandfold/transform"
)

type learnFlags struct {
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

func newLearnCommand(g *globals) *cobra.Command { return learnCommand(g, &learnFlags{}) }

// learnCommand binds the command's flags to fl.
func learnCommand(g *globals, fl *learnFlags) *cobra.Command {
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
		Args: args(cobra.MinimumNArgs(1)),
		RunE: g.runE(func(ctx context.Context, env job.Env, a []string) error {
			o, err := fl.options(a, os.Getenv)
			if err != nil {
				return err
			}
			res, err := job.Learn(ctx, env, o)
			if err != nil {
				return err
			}
			if res.Partial != nil {
				g.info("wrote partial statistics of shard %s (%.0f pixels) to %s", o.Shard, res.Partial.State.Count, res.Path)
				return g.emit(map[string]any{"partial": res.Path, "shard": o.Shard.String(), "pixels": int64(res.Partial.State.Count), "bands": len(res.Partial.Bands)})
			}
			return g.reportBasis(res.Summary, res.Path)
		}),
	}
	f := cmd.Flags()
	fl.input.register(f, true)
	f.StringVarP(&fl.out, "out", "o", "", "basis file to write (JSON)")
	f.StringVar(&fl.partial, "partial", "", "write the shard's un-decomposed statistics to this file instead of a basis")
	f.StringVar(&fl.mode, "mode", "covariance", "covariance or correlation (standardised bands)")
	f.IntVarP(&fl.components, "components", "k", 0, "number of components to keep (overrides --variance)")
	f.Float64Var(&fl.variance, "variance", 0.99, "keep the fewest components whose cumulative share of variance reaches this fraction")
	f.IntVar(&fl.stride, "stride", 1, "fit on every N-th row and column only")
	f.StringVar(&fl.shard, "shard", "", `process only shard I of N ("I/N", or "auto" from a Slurm array or Kubernetes Indexed Job)`)
	f.IntVar(&fl.shardCount, "shard-count", 0, "number of shards for --shard auto in a Kubernetes Indexed Job")
	f.BoolVar(&fl.overwrite, "overwrite", false, "replace an existing output")
	cmd.MarkFlagsMutuallyExclusive("out", "partial")
	cmd.MarkFlagsOneRequired("out", "partial")
	return cmd
}

// options translates the flags; getenv reads the scheduler's environment.
func (fl *learnFlags) options(scenes []string, getenv func(string) string) (job.LearnOptions, error) {
	if fl.stride < 1 {
		return job.LearnOptions{}, usagef("--stride %d: must be at least 1", fl.stride)
	}
	mode, err := transform.ParseMode(fl.mode)
	if err != nil {
		return job.LearnOptions{}, usagef("--mode %q: want covariance or correlation", fl.mode)
	}
	sh, err := job.ParseShard(fl.shard, fl.shardCount, getenv)
	if err != nil {
		return job.LearnOptions{}, err
	}
	in, err := fl.input.input()
	if err != nil {
		return job.LearnOptions{}, err
	}
	return job.LearnOptions{Scenes: fl.input.scenes(scenes), Input: in, Out: fl.out, Partial: fl.partial, Mode: mode,
		Components: fl.components, Variance: fl.variance, Stride: fl.stride, Shard: sh, Overwrite: fl.overwrite}, nil
}

// reportBasis prints the variance table on stderr and the summary as JSON
// on stdout with --json.
func (g *globals) reportBasis(s job.BasisSummary, path string) error {
	if !g.quiet {
		w := g.stderr
		if path != "" {
			fmt.Fprintf(w, "basis %s: %d bands, %d pixels, %s mode\n", path, s.Bands, s.Pixels, s.Mode)
		}
		fmt.Fprintf(w, "%4s | %14s | %12s | %8s | %9s | %12s\n", "pc", "eigenvalue", "sd", "share", "cum_share", "broken_stick")
		// Long tables (hyperspectral bases) stop after the kept components
		// and a few more, unless --verbose.
		rows := len(s.Eigenvalues)
		if !g.verbose {
			rows = min(rows, max(s.Components+5, 10))
		}
		for i, v := range s.Eigenvalues[:rows] {
			mark := " "
			if i < s.Components {
				mark = "*"
			}
			fmt.Fprintf(w, "%3d%s | %14.6g | %12.6g | %8.5f | %9.5f | %12.5f\n", i+1, mark, v, math.Sqrt(max(v, 0)), s.Explained[i], s.Cumulative[i], s.BrokenStickShares[i])
		}
		if rows < len(s.Eigenvalues) {
			fmt.Fprintf(w, "%4s | (%d more components, %.5f of the variance; --verbose lists them)\n", "...", len(s.Eigenvalues)-rows, 1-s.Cumulative[rows-1])
		}
		fmt.Fprintf(w, "kept (*): %d components, %.4f of the variance; broken-stick rule keeps %d", s.Components, s.Cumulative[s.Components-1], s.BrokenStick)
		if s.Kaiser != nil {
			fmt.Fprintf(w, "; eigenvalue > 1 keeps %d", *s.Kaiser)
		}
		fmt.Fprintln(w)
	}
	return g.emit(s)
}
