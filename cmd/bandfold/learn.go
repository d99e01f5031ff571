package main

import (
	"context"
	"fmt"
	"os"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/transform"
)

type learnFlags struct {
	input       inputFlags
	out         string
	partial     string
	mode        string
	components  int
	variance    float64
	stride      int
	shard       string
	shardCount  int
	overwrite   bool
	ignoreNames bool
	method      string
	noise       string
	minSNR      float64
	suggest     bool
	wavelength  string
	exclude     string
	excludeNM   string
	set         *pflag.FlagSet
}

func newLearnCommand(g *globals) *cobra.Command { return learnCommand(g, &learnFlags{}) }

// learnCommand binds the command's flags to fl.
func learnCommand(g *globals, fl *learnFlags) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "learn IMAGE... (--out BASIS.json | --partial PART.json)",
		Short: "Fit a principal component basis from one or more scenes",
		Long:  cli.LearnHelp,
		Example: `  bandfold learn cube.tif --out cube.basis.json --variance 0.995
  bandfold learn 2025.tif 2026.tif --bands 1-6 --mode correlation --out pooled.basis.json
  bandfold learn scene.tif --shard 0/4 --partial part0.json`,
		Args: args(cobra.MinimumNArgs(1)),
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o, err := fl.options(a, os.Getenv)
			if err != nil {
				return err
			}
			res, err := learn.Learn(ctx, env, o)
			if err != nil {
				return err
			}
			if res.Suggest != nil {
				g.reportSuggest(res.Suggest)
				return g.emit(map[string]any{"suggest_exclude": res.Suggest, "threshold_snr": learn.SuggestSNR})
			}
			if res.Partial != nil {
				g.info("wrote partial statistics of shard %s (%.0f pixels) to %s", o.Shard, res.Partial.State.Count, res.Path)
				return g.emit(map[string]any{"partial": res.Path, "shard": o.Shard.String(), "pixels": int64(res.Partial.State.Count), "bands": len(res.Partial.Bands)})
			}
			return g.reportBasis(res.Summary, res.Path)
		}),
	}
	f := cmd.Flags()
	fl.set = f
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
	f.BoolVar(&fl.ignoreNames, "ignore-band-names", false, "pool scenes whose bands are named differently if they have as many bands, taken in order")
	f.StringVar(&fl.method, "method", "pca", "pca (order by variance) or mnf (minimum noise fraction: order by signal-to-noise ratio)")
	f.StringVar(&fl.noise, "noise", "horizontal", "pixel pairs of the noise estimate: horizontal, vertical or both")
	f.Float64Var(&fl.minSNR, "min-snr", 0, "with --method mnf, keep the components whose signal-to-noise ratio is at least this")
	f.BoolVar(&fl.suggest, "suggest-exclude", false, fmt.Sprintf("list the bands whose estimated signal-to-noise ratio is below %g, without fitting", learn.SuggestSNR))
	f.StringVar(&fl.wavelength, "wavelengths", "", "file of band centre wavelengths (one per line or a CSV column; unit nm or um in the header or after each value)")
	f.StringVar(&fl.exclude, "exclude", "", `band numbers to drop before fitting, counted within --bands when given, e.g. "104-113,150-170"`)
	f.StringVar(&fl.excludeNM, "exclude-nm", "", `wavelength ranges in nm to drop before fitting, e.g. "1340-1450,1790-1970"`)
	cmd.MarkFlagsMutuallyExclusive("out", "partial", "suggest-exclude")
	cmd.MarkFlagsOneRequired("out", "partial", "suggest-exclude")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "wavelengths")
	return cmd
}

// options translates the flags; getenv reads the scheduler's environment.
func (fl *learnFlags) options(scenes []string, getenv func(string) string) (learn.LearnOptions, error) {
	if fl.stride < 1 {
		return learn.LearnOptions{}, usagef("--stride %d: must be at least 1", fl.stride)
	}
	mode, err := transform.ParseMode(fl.mode)
	if err != nil {
		return learn.LearnOptions{}, usagef("--mode %q: want covariance or correlation", fl.mode)
	}
	sh, err := jobkit.ParseShard(fl.shard, fl.shardCount, getenv)
	if err != nil {
		return learn.LearnOptions{}, err
	}
	in, err := fl.input.input()
	if err != nil {
		return learn.LearnOptions{}, err
	}
	o := learn.LearnOptions{Scenes: fl.input.scenes(scenes), Input: in, Out: fl.out, Partial: fl.partial, Mode: mode,
		Components: fl.components, Variance: fl.variance, Stride: fl.stride, Shard: sh, Overwrite: fl.overwrite,
		MinSNR: fl.minSNR, SuggestExclude: fl.suggest, IgnoreBandNames: fl.ignoreNames, Spectral: jobkit.Spectral{WavelengthsFile: fl.wavelength}}
	if o.Method, err = transform.ParseMethod(fl.method); err != nil {
		return o, usagef("--method %q: want pca or mnf", fl.method)
	}
	if o.Noise, err = bands.ParseShift(fl.noise); err != nil {
		return o, usagef("--noise %q: want horizontal, vertical or both", fl.noise)
	}
	if err := fl.inert(o.Method); err != nil {
		return o, err
	}
	if fl.exclude != "" {
		if o.Spectral.Exclude, err = transform.ParseBandRanges(fl.exclude); err != nil {
			return o, usagef("--exclude %s", err)
		}
	}
	if fl.excludeNM != "" {
		if o.Spectral.ExcludeNM, err = transform.ParseNMRanges(fl.excludeNM); err != nil {
			return o, usagef("--exclude-nm %s", err)
		}
	}
	return o, nil
}

// inert refuses flags given that would change nothing: --noise with
// principal components (they use no noise estimate, unless
// --suggest-exclude asks for one), and --min-snr with --variance.
func (fl *learnFlags) inert(method transform.Method) error {
	if fl.set.Changed("noise") && method != transform.MNF && !fl.suggest {
		return usagef("--noise %s with --method pca: principal components use no noise estimate (--noise serves --method mnf and --suggest-exclude)", fl.noise)
	}
	return snrWithVariance(fl.set)
}

// snrWithVariance refuses --min-snr given with --variance, which it would
// override without a word (learn and merge).
func snrWithVariance(set *pflag.FlagSet) error {
	if set.Changed("min-snr") && set.Changed("variance") {
		return usagef("--min-snr with --variance: give one rule for the number of components")
	}
	return nil
}

// reportBasis prints the variance table on stderr and the summary as JSON
// on stdout with --json.
func (g *globals) reportBasis(s learn.BasisSummary, path string) error {
	if !g.quiet {
		cli.BasisTable(g.stderr, s, path, g.verbose)
	}
	return g.emit(s)
}

// reportSuggest lists the bands learn --suggest-exclude found.
func (g *globals) reportSuggest(list []learn.BandSNR) {
	if !g.quiet {
		cli.SuggestText(g.stderr, list)
	}
}
