package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strconv"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
)

type foldFlags struct {
	input      inputFlags
	format     string
	shard      string
	shardCount int
	maxRMSE    string
	minPSNR    float64
	set        *pflag.FlagSet
	o          fold.FoldOptions
}

func newFoldCommand(g *globals) *cobra.Command { return foldCommand(g, &foldFlags{}) }

// foldCommand binds the command's flags to fl.
func foldCommand(g *globals, fl *foldFlags) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "fold IMAGE... --basis BASIS.json (--out COMPONENTS.tif | --out-dir DIR)",
		Short: "Write component images: the scores of every pixel on the kept components",
		Long:  cli.FoldHelp,
		Example: `  bandfold fold cube.tif --basis cube.basis.json --out cube.components.tif --type int16
  bandfold fold scenes/*.tif --basis ref.basis.json --out-dir components --json
  bandfold fold --list scenes.txt --basis ref.basis.json --out-dir components --shard auto`,
		RunE: g.runE(func(ctx context.Context, env jobkit.Env, a []string) error {
			o, err := fl.options(a, os.Getenv)
			if err != nil {
				return err
			}
			if o.Out != "" {
				res, err := fold.Fold(ctx, env, o)
				if err != nil {
					return err
				}
				g.reportFold(*res)
				return g.emit(res)
			}
			return g.foldBatch(ctx, env, o)
		}),
	}
	f := cmd.Flags()
	fl.set = f
	fl.input.register(f, true)
	o := &fl.o
	f.StringVarP(&o.Basis, "basis", "b", "", "basis file from learn or merge")
	f.StringVarP(&o.Out, "out", "o", "", "component image to write (one input)")
	f.StringVar(&o.OutDir, "out-dir", "", "folder for the component images of many inputs (created when missing)")
	f.StringVar(&o.Name, "name", "{stem}.components.tif", "output name in --out-dir; {stem} is the input file name without extension")
	f.StringVar(&o.List, "list", "", "file with one input per line (relative paths are relative to the list's folder)")
	f.IntVarP(&o.Components, "components", "k", 0, "number of components (default: the basis's chosen k)")
	f.StringVar(&fl.format, "format", "gtiff", "gtiff or cog")
	f.StringVar(&o.Type, "type", "float32", "float32, float64, or int16 (scaled per component: the compact form)")
	f.StringVar(&fl.maxRMSE, "max-rmse", "", `error budget: the overall RMSE of the rebuilt bands, or "noise" (the basis's noise level); chooses the components and integer codes`)
	f.Float64Var(&fl.minPSNR, "min-psnr", 0, "error budget as the least overall PSNR in dB (peak: the largest band range in the basis)")
	f.BoolVar(&o.IgnoreBandNames, "ignore-band-names", false, "accept bands named differently from the basis's if they match in order")
	f.StringArrayVar(&o.CreationOptions, "co", nil, "GDAL creation option KEY=VALUE (repeatable)")
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace existing outputs")
	f.StringVar(&o.Preview, "preview", "", "also write an RGB quicklook PNG of components 1-3 (2-98% stretch)")
	f.StringVar(&fl.shard, "shard", "", `process only scenes I, I+N, ... of the list ("I/N", or "auto")`)
	f.IntVar(&fl.shardCount, "shard-count", 0, "number of shards for --shard auto in a Kubernetes Indexed Job")
	cmd.MarkFlagRequired("basis")
	cmd.MarkFlagsMutuallyExclusive("out", "out-dir")
	cmd.MarkFlagsOneRequired("out", "out-dir")
	cli.MarkArgs(cmd, cli.InputImage)
	cli.MarkInputs(f, cli.InputFile, "basis", "list")
	return cmd
}

// options translates the flags.
func (fl *foldFlags) options(scenes []string, getenv func(string) string) (fold.FoldOptions, error) {
	o := fl.o
	o.Scenes = fl.input.scenes(scenes)
	var err error
	if o.Format, err = raster.ParseFormat(fl.format); err != nil {
		return o, &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
	}
	if o.Shard, err = jobkit.ParseShard(fl.shard, fl.shardCount, getenv); err != nil {
		return o, err
	}
	if o.Input, err = fl.input.input(); err != nil {
		return o, err
	}
	if err := checkCreationOptions(o.CreationOptions); err != nil {
		return o, err
	}
	switch {
	case o.Out != "" && o.List != "":
		return o, usagef("--list goes with --out-dir")
	case o.Out != "" && len(o.Scenes) != 1:
		return o, usagef("--out takes one input; use --out-dir for %d inputs, or --stack to read them as one stack", len(o.Scenes))
	case o.Preview != "" && o.Out == "":
		return o, usagef("--preview goes with --out (one input)")
	}
	if o.Budget, err = fl.budget(); err != nil || o.Budget.Kind == "" {
		return o, err
	}
	if fl.set.Changed("type") || fl.set.Changed("components") {
		return o, usagef("%s with --type or --components: the budget chooses the components and the integer type", o.Budget)
	}
	o.Type = ""
	return o, nil
}

// budget translates --max-rmse and --min-psnr.
func (fl *foldFlags) budget() (fold.Budget, error) {
	rmse, psnr := fl.set.Changed("max-rmse"), fl.set.Changed("min-psnr")
	v, err := strconv.ParseFloat(fl.maxRMSE, 64)
	switch {
	case rmse && psnr:
		return fold.Budget{}, usagef("--max-rmse and --min-psnr: give one budget")
	case psnr:
		return fold.Budget{Kind: fold.BudgetPSNR, Value: fl.minPSNR}, nil
	case rmse && fl.maxRMSE == "noise":
		return fold.Budget{Kind: fold.BudgetNoise}, nil
	case rmse && err != nil:
		return fold.Budget{}, usagef(`--max-rmse %q: want a number or "noise"`, fl.maxRMSE)
	case rmse:
		return fold.Budget{Kind: fold.BudgetRMSE, Value: v}, nil
	}
	return fold.Budget{}, nil
}

// reportFold prints what fold wrote; a failed scene is printed even with
// --quiet.
func (g *globals) reportFold(r fold.FoldScene) {
	if !g.quiet || r.Status == "failed" {
		cli.FoldText(g.stderr, r)
	}
}

// foldBatch folds many scenes, printing each scene's result as it comes.
func (g *globals) foldBatch(ctx context.Context, env jobkit.Env, o fold.FoldOptions) error {
	var emitErr error
	o.OnScene = func(r fold.FoldScene) {
		g.reportFold(r)
		if err := g.emit(r); err != nil && emitErr == nil {
			emitErr = err
		}
	}
	sum, err := fold.FoldBatch(ctx, env, o)
	if sum == nil {
		return err
	}
	g.info("batch %s: %d scenes, %d written, %d skipped (already complete), %d failed, %.1f s", sum.Shard, sum.Scenes, sum.Written, sum.Skipped, sum.Failed, sum.Seconds)
	if e := g.emit(sum); e != nil {
		return e
	}
	return errors.Join(err, emitErr)
}
