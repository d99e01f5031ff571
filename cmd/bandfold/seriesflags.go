package main

import (
	"context"
	"fmt"

	"github.com/spf13/pflag"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/transform/change"
)

// seriesFlags are the flags change and timeline share, the command line
// of series.SharedOptions.
type seriesFlags struct {
	input     inputFlags
	threshold string
	minArea   string
	format    string
	stage     stageFlags
}

// seriesHelp words the shared flags' help for one command.
type seriesHelp struct {
	command, align, resampling, basis, sample, normalize string
}

// register binds the shared flags to fl and o.
func (fl *seriesFlags) register(f *pflag.FlagSet, o *series.SharedOptions, h seriesHelp) {
	fl.input.register(f, false)
	f.StringVarP(&o.Out, "out", "o", "", "folder for the outputs")
	f.BoolVar(&o.Align, "align", false, h.align)
	f.StringVar(&o.Resampling, "resampling", "", h.resampling)
	f.StringVarP(&o.Basis, "basis", "b", "", h.basis)
	f.IntVarP(&o.Components, "components", "k", 0, "number of components (default: 99% of the pooled variance, at least 3)")
	f.StringVar(&fl.threshold, "threshold", change.DefaultThreshold, "chisq:Q, sigma:N, otsu or value:Z")
	f.StringVar(&fl.minArea, "min-area", "4px", "minimum mapping unit: a number with m2, ha, km2 or px; 0 turns it off")
	f.IntVar(&o.Sample, "sample", change.DefaultSampleSize, h.sample)
	f.BoolVar(&o.Overwrite, "overwrite", false, "replace a previous "+h.command+" output folder")
	f.StringVar(&fl.format, "format", "gtiff", "raster format of the outputs: gtiff or cog (Cloud Optimized GeoTIFF, with overviews)")
	f.StringArrayVar(&o.Output.CreationOptions, "co", nil, "GDAL creation option KEY=VALUE for the rasters written (repeatable)")
	f.StringVar(&o.Normalize, "normalize", series.NormalizeStable, h.normalize)
	f.BoolVar(&o.IgnoreBandNames, "ignore-band-names", false, "compare the dates band for band even where their wavelengths differ")
	fl.stage.register(f, h.command)
}

// shared translates the shared flags into o; getenv reads the
// scheduler's environment for --shard auto.
func (fl *seriesFlags) shared(o *series.SharedOptions, getenv func(string) string) error {
	var err error
	if o.Threshold, err = change.ParseThreshold(fl.threshold); err != nil {
		return &jobkit.UsageError{Err: fmt.Errorf("--%w", err)}
	}
	if o.MinArea, err = jobkit.ParseMinArea(fl.minArea); err != nil {
		return err
	}
	if o.Normalize, err = series.ParseNormalize(o.Normalize); err != nil {
		return err
	}
	if o.Output.Format, err = raster.ParseFormat(fl.format); err != nil {
		return usagef("--format %q: want gtiff or cog", fl.format)
	}
	if o.Input, err = fl.input.input(); err != nil {
		return err
	}
	o.Staging, err = fl.stage.staging(getenv)
	return err
}

// runStaged runs a stage of a staged run when one is asked for, saying
// what it wrote; staged is false for a run that writes the folder (the
// finish, or every stage at once), which the caller then runs.
func (g *globals) runStaged(ctx context.Context, env jobkit.Env, command string, st series.Staging,
	stage func(context.Context, jobkit.Env) (*series.StageResult, error)) (staged bool, err error) {
	if st.WritesFolder() {
		return false, nil
	}
	res, err := stage(ctx, env)
	if err != nil {
		return true, err
	}
	g.info("%s --stage %s: wrote %s", command, res.Stage, res.File)
	return true, g.emit(res)
}

// stageFlags are the flags of a staged run of change or timeline.
type stageFlags struct {
	stage, shard string
	shardCount   int
}

func (f *stageFlags) register(fs *pflag.FlagSet, folder string) {
	fs.StringVar(&f.stage, "stage", "", "run one stage of a staged run: scan (per shard), fit, map (per shard) or finish (writes the "+folder+" folder); default: all in one process")
	fs.StringVar(&f.shard, "shard", "", `the shard of a scan or map stage ("I/N", or "auto" from a Slurm array or Kubernetes Indexed Job)`)
	fs.IntVar(&f.shardCount, "shard-count", 0, "number of shards for --shard auto in a Kubernetes Indexed Job")
}

// staging reads the flags; getenv reads the scheduler's environment.
func (f *stageFlags) staging(getenv func(string) string) (series.Staging, error) {
	st := series.Staging{Stage: f.stage}
	if f.shard == "" {
		return st, nil
	}
	var err error
	st.Shard, err = jobkit.ParseShard(f.shard, f.shardCount, getenv)
	return st, err
}
