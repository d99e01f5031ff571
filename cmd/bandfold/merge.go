package main

import (
	"context"
	"fmt"

	"github.com/spf13/cobra"

	"bandfold/raster"
	"bandfold/transform"
)

type mergeOptions struct {
	out        string
	components int
	variance   float64
	overwrite  bool
}

func newMergeCommand(g *globals) *cobra.Command {
	o := &mergeOptions{}
	cmd := &cobra.Command{
		Use:   "merge PART... --out BASIS.json",
		Short: "Combine the partial statistics of all shards into a basis",
		Long: `merge combines the partial files written by "learn --shard I/N --partial"
and finishes the basis. It refuses a set that is not exactly shards 0..N-1,
once each, of the same inputs, bands, mode, tile size and stride, so a failed
task can never yield a silently wrong basis.`,
		Example: `  bandfold merge parts/part-*.json --out scene.basis.json`,
		Args:    cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runMerge(cmd.Context(), g, o, args)
		},
	}
	f := cmd.Flags()
	f.StringVarP(&o.out, "out", "o", "", "basis file to write (JSON)")
	f.IntVarP(&o.components, "components", "k", 0, "number of components to keep (overrides --variance)")
	f.Float64Var(&o.variance, "variance", 0.99, "keep the fewest components whose cumulative share of variance reaches this fraction")
	f.BoolVar(&o.overwrite, "overwrite", false, "replace an existing output")
	cmd.MarkFlagRequired("out")
	return cmd
}

func runMerge(_ context.Context, g *globals, o *mergeOptions, paths []string) error {
	if err := transform.ValidateFraction(o.variance); err != nil {
		return usagef("--variance %v: must be in (0, 1]", o.variance)
	}
	if o.components < 0 {
		return usagef("--components %d: must be positive", o.components)
	}
	if err := raster.CheckTarget(o.out, o.overwrite); err != nil {
		return err
	}
	parts := make([]*transform.Partial, len(paths))
	for i, p := range paths {
		part, err := transform.ReadPartial(p)
		if err != nil {
			return err
		}
		parts[i] = part
	}
	total, err := transform.Combine(parts, paths)
	if err != nil {
		return err
	}
	first := parts[0]
	if o.components > len(first.Bands) {
		return usagef("--components %d: the partials have only %d bands", o.components, len(first.Bands))
	}
	b, err := fitBasis(total, first.Mode, append([]transform.Band(nil), first.Bands...), fmt.Sprintf("the %d partial files", len(parts)))
	if err != nil {
		return err
	}
	b.Stride = first.Stride
	b.Inputs = first.Inputs
	choose(b, o.components, o.variance)
	if err := b.WriteFile(o.out); err != nil {
		return err
	}
	return reportBasis(g, b, o.out)
}
