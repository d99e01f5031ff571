package main

import (
	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"reflect"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"bandfold/raster"
	"bandfold/transform"
	"bandfold/transform/change"
)

// parseArgs parses argv with cmd's flags and returns the positional
// arguments, as cobra does before running a command.
func parseArgs(t *testing.T, cmd *cobra.Command, argv []string) []string {
	t.Helper()
	if err := cmd.ParseFlags(argv); err != nil {
		t.Fatalf("%v: %v", argv, err)
	}
	return cmd.Flags().Args()
}

// noEnv is a scheduler environment with nothing set.
func noEnv(string) string { return "" }

// checkOptionError requires err to be a usage error containing want.
func checkOptionError(t *testing.T, argv []string, err error, want string) {
	t.Helper()
	if err == nil || !strings.Contains(err.Error(), want) || !jobkit.IsUsage(err) {
		t.Errorf("%v: error %v; want a usage error containing %q", argv, err, want)
	}
}

// optionCase is one command line and the options (or the usage error) it
// must give.
type optionCase[T any] struct {
	argv []string
	want T
	err  string
}

// checkOptions parses every case with parse and compares the options.
func checkOptions[T any](t *testing.T, tests []optionCase[T], parse func(argv []string) (T, error)) {
	t.Helper()
	for _, tc := range tests {
		o, err := parse(tc.argv)
		if tc.err != "" {
			checkOptionError(t, tc.argv, err, tc.err)
			continue
		}
		if err != nil || !reflect.DeepEqual(o, tc.want) {
			t.Errorf("%v:\n got %+v, %v\nwant %+v", tc.argv, o, err, tc.want)
		}
	}
}

// The expected option values below are known by construction: each is the
// flag's documented default or the value typed.
func TestLearnFlagsToOptions(t *testing.T) {
	tests := []optionCase[learn.LearnOptions]{
		{[]string{"a.tif", "--out", "b.json"}, learn.LearnOptions{Scenes: []string{"a.tif"}, Out: "b.json", Mode: transform.Covariance,
			Variance: 0.99, Stride: 1, Shard: jobkit.Shard{I: 0, N: 1}, Method: transform.PCA, Noise: bands.Horizontal}, ""},
		{[]string{"a.tif", "b.tif", "--partial", "p.json", "--bands", "1-3,5", "--nodata", "0", "--mask", "m.tif", "--tile", "64",
			"--mode", "correlation", "-k", "3", "--variance", "0.9", "--stride", "2", "--shard", "1/4", "--overwrite"},
			learn.LearnOptions{Scenes: []string{"a.tif", "b.tif"}, Partial: "p.json", Mode: transform.Correlation, Components: 3, Variance: 0.9,
				Stride: 2, Shard: jobkit.Shard{I: 1, N: 4}, Overwrite: true, Method: transform.PCA, Noise: bands.Horizontal,
				Input: jobkit.Input{Bands: []int{1, 2, 3, 5}, NoData: []float64{0}, Masks: []raster.MaskRule{{Path: "m.tif"}}, Tile: 64}}, ""},
		{[]string{"B1.TIF", "B2.TIF", "B3.TIF", "--stack", "--out", "b.json", "--mask", "QA.TIF:bits=0-4,9", "--mask", "m.tif:values=0,3-5",
			"--align", "--resampling", "average", "--calibrate", "toa"},
			learn.LearnOptions{Scenes: []string{"B1.TIF,B2.TIF,B3.TIF"}, Out: "b.json", Mode: transform.Covariance, Variance: 0.99, Stride: 1,
				Method: transform.PCA, Noise: bands.Horizontal,
				Shard: jobkit.Shard{I: 0, N: 1}, Input: jobkit.Input{Masks: []raster.MaskRule{{Path: "QA.TIF", Bits: []int{0, 1, 2, 3, 4, 9}},
					{Path: "m.tif", Values: []raster.ValueRange{{Lo: 0, Hi: 0}, {Lo: 3, Hi: 5}}}}, Align: true, Resampling: "average", Calibrate: "toa"}}, ""},
		{[]string{"items.json", "https://example.com/item.json", "--out", "b.json", "--assets", "red, nir08,B6"},
			learn.LearnOptions{Scenes: []string{"items.json", "https://example.com/item.json"}, Out: "b.json", Mode: transform.Covariance,
				Variance: 0.99, Stride: 1, Shard: jobkit.Shard{I: 0, N: 1}, Method: transform.PCA, Noise: bands.Horizontal,
				Input: jobkit.Input{Assets: []string{"red", "nir08", "B6"}}}, ""},
		{[]string{"a.json", "--out", "b.json", "--assets", "red,"}, learn.LearnOptions{}, `--assets "red,": an empty item between commas`},
		{[]string{"a.tif", "--out", "b.json", "--mask", "QA.TIF:bits=64"}, learn.LearnOptions{}, `--mask "QA.TIF:bits=64"`},
		{[]string{"a.tif", "--out", "b.json", "--calibrate", "dn"}, learn.LearnOptions{}, `--calibrate "dn": want scale, toa, reflectance`},
		{[]string{"a.tif", "--out", "b.json", "--align", "--resampling", "sinc"}, learn.LearnOptions{}, `--resampling "sinc"`},
		{[]string{"a.tif", "--out", "b.json", "--mode", "spectral"}, learn.LearnOptions{}, `--mode "spectral"`},
		{[]string{"a.tif", "--out", "b.json", "--bands", "3-1"}, learn.LearnOptions{}, `--bands "3-1": range 3-1 runs backwards`},
		{[]string{"a.tif", "--out", "b.json", "--nodata", "zero"}, learn.LearnOptions{}, `--nodata "zero"`},
		{[]string{"a.tif", "--partial", "p.json", "--shard", "4/4"}, learn.LearnOptions{}, "need 0 <= I < N"},
		{[]string{"a.tif", "--suggest-exclude", "--method", "mnf", "--noise", "both", "--min-snr", "2", "--exclude", "3-4,1", "--exclude-nm", "1340-1450", "--wavelengths", "w.txt"},
			learn.LearnOptions{Scenes: []string{"a.tif"}, Mode: transform.Covariance, Variance: 0.99, Stride: 1, Shard: jobkit.Shard{I: 0, N: 1},
				Method: transform.MNF, Noise: bands.Both, MinSNR: 2, SuggestExclude: true,
				Spectral: jobkit.Spectral{WavelengthsFile: "w.txt", Exclude: []int{1, 3, 4}, ExcludeNM: []transform.NMRange{{Lo: 1340, Hi: 1450}}}}, ""},
		{[]string{"a.tif", "--out", "b.json", "--method", "ica"}, learn.LearnOptions{}, `--method "ica": want pca or mnf`},
		{[]string{"a.tif", "--out", "b.json", "--noise", "diagonal"}, learn.LearnOptions{}, `--noise "diagonal"`},
		{[]string{"a.tif", "--out", "b.json", "--exclude", "5-3"}, learn.LearnOptions{}, `--exclude "5-3": bands count from 1`},
		{[]string{"a.tif", "--out", "b.json", "--exclude-nm", "1450"}, learn.LearnOptions{}, `--exclude-nm "1450" is not a wavelength range`},
		{[]string{"a.tif", "--partial", "p.json", "--shard", "auto"}, learn.LearnOptions{}, "no job array in the environment"},
	}
	checkOptions(t, tests, func(argv []string) (learn.LearnOptions, error) {
		fl := &learnFlags{}
		return fl.options(parseArgs(t, learnCommand(&globals{}, fl), argv), noEnv)
	})
}

func TestFoldFlagsToOptions(t *testing.T) {
	tests := []optionCase[fold.FoldOptions]{
		{[]string{"a.tif", "--basis", "b.json", "--out", "c.tif"}, fold.FoldOptions{Scenes: []string{"a.tif"}, Basis: "b.json", Out: "c.tif",
			Name: "{stem}.components.tif", Format: raster.GTiff, Type: "float32", Shard: jobkit.Shard{I: 0, N: 1}}, ""},
		{[]string{"a.tif", "b.tif", "-b", "b.json", "--out-dir", "d", "--name", "{stem}.pc.tif", "-k", "2", "--format", "cog", "--type", "int16",
			"--ignore-band-names", "--co", "ZLEVEL=9", "--co", "BLOCKXSIZE=512", "--overwrite", "--shard", "0/2", "--tile", "128"},
			fold.FoldOptions{Scenes: []string{"a.tif", "b.tif"}, Basis: "b.json", OutDir: "d", Name: "{stem}.pc.tif", Components: 2,
				Format: raster.COG, Type: "int16", IgnoreBandNames: true, CreationOptions: []string{"ZLEVEL=9", "BLOCKXSIZE=512"},
				Overwrite: true, Shard: jobkit.Shard{I: 0, N: 2}, Input: jobkit.Input{Tile: 128}}, ""},
		{[]string{"a.tif", "-b", "b.json", "--out", "c.tif", "--format", "png"}, fold.FoldOptions{}, `--format "png"`},
		{[]string{"a.tif", "-b", "b.json", "--out", "c.tif", "--co", "FOO"}, fold.FoldOptions{}, `--co "FOO": want KEY=VALUE`},
		{[]string{"a.tif", "b.tif", "-b", "b.json", "--out", "c.tif"}, fold.FoldOptions{}, "--out takes one input"},
		{[]string{"a.tif", "-b", "b.json", "--out-dir", "d", "--preview", "p.png"}, fold.FoldOptions{}, "--preview goes with --out"},
		{[]string{"-b", "b.json", "--out", "c.tif", "--list", "l.txt"}, fold.FoldOptions{}, "--list goes with --out-dir"},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--max-rmse", "5"}, fold.FoldOptions{Scenes: []string{"a.tif"}, Basis: "b.json", Out: "c.tif",
			Name: "{stem}.components.tif", Format: raster.GTiff, Shard: jobkit.Shard{I: 0, N: 1}, Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 5}}, ""},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--max-rmse", "noise"}, fold.FoldOptions{Scenes: []string{"a.tif"}, Basis: "b.json", Out: "c.tif",
			Name: "{stem}.components.tif", Format: raster.GTiff, Shard: jobkit.Shard{I: 0, N: 1}, Budget: fold.Budget{Kind: fold.BudgetNoise}}, ""},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--min-psnr", "45"}, fold.FoldOptions{Scenes: []string{"a.tif"}, Basis: "b.json", Out: "c.tif",
			Name: "{stem}.components.tif", Format: raster.GTiff, Shard: jobkit.Shard{I: 0, N: 1}, Budget: fold.Budget{Kind: fold.BudgetPSNR, Value: 45}}, ""},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--max-rmse", "low"}, fold.FoldOptions{}, `--max-rmse "low": want a number or "noise"`},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--max-rmse", "5", "--min-psnr", "40"}, fold.FoldOptions{}, "give one budget"},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--max-rmse", "5", "--type", "int16"}, fold.FoldOptions{}, "--max-rmse 5 with --type or --components"},
		{[]string{"a.tif", "-b", "b.json", "-o", "c.tif", "--min-psnr", "40", "-k", "2"}, fold.FoldOptions{}, "--min-psnr 40 with --type or --components"},
	}
	checkOptions(t, tests, func(argv []string) (fold.FoldOptions, error) {
		fl := &foldFlags{}
		return fl.options(parseArgs(t, foldCommand(&globals{}, fl), argv), noEnv)
	})
}

func TestUnfoldFlagsToOptions(t *testing.T) {
	tests := []optionCase[fold.UnfoldOptions]{
		{[]string{"c.tif", "--basis", "b.json", "--out", "r.tif"}, fold.UnfoldOptions{Components: "c.tif", Basis: "b.json", Out: "r.tif",
			Type: "same", Format: raster.GTiff}, ""},
		{[]string{"c.tif", "-b", "b.json", "-o", "r.tif", "--type", "float64", "--compare", "a.tif", "--bands", "2-3", "--format", "cog",
			"--co", "ZLEVEL=1", "--overwrite", "--ignore-basis-mismatch"},
			fold.UnfoldOptions{Components: "c.tif", Basis: "b.json", Out: "r.tif", Type: "float64", Compare: "a.tif", Format: raster.COG,
				CreationOptions: []string{"ZLEVEL=1"}, Overwrite: true, IgnoreBasisMismatch: true, Input: jobkit.Input{Bands: []int{2, 3}}}, ""},
		{[]string{"c.tif", "-b", "b.json", "-o", "r.tif", "--format", "jpeg"}, fold.UnfoldOptions{}, `--format "jpeg"`},
	}
	checkOptions(t, tests, func(argv []string) (fold.UnfoldOptions, error) {
		fl := &unfoldFlags{}
		return fl.options(parseArgs(t, unfoldCommand(&globals{}, fl), argv)[0])
	})
}

func TestChangeFlagsToOptions(t *testing.T) {
	def, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		t.Fatal(err)
	}
	sigma, err := change.ParseThreshold("sigma:4")
	if err != nil {
		t.Fatal(err)
	}
	tests := []optionCase[pairchange.ChangeOptions]{
		{[]string{"a.tif", "b.tif", "--out", "d"}, pairchange.ChangeOptions{Before: "a.tif", After: "b.tif", SharedOptions: series.SharedOptions{Out: "d",
			Threshold: def, MinArea: jobkit.MinArea{Px: 4}, Sample: change.DefaultSampleSize, Normalize: series.NormalizeStable, Output: jobkit.OutputFormat{Format: raster.GTiff}}}, ""},
		{[]string{"a.tif", "b.tif", "-o", "d", "--mask-before", "ma.tif", "--mask-after", "mb.tif:bits=15", "--bands-before", "1-5,7", "--bands-after", "2-7", "--align", "--resampling", "average",
			"-b", "p.json", "-k", "2", "--threshold", "sigma:4", "--min-area", "0.5ha", "--differences", "--pvalues", "--reference", "r.gpkg",
			"--preview-bands", "3,2,1", "--sample", "5000", "--overwrite", "--normalize", "none", "--format", "cog", "--co", "LEVEL=9"},
			pairchange.ChangeOptions{Before: "a.tif", After: "b.tif", MaskBefore: []raster.MaskRule{{Path: "ma.tif"}}, MaskAfter: []raster.MaskRule{{Path: "mb.tif", Bits: []int{15}}},
				Differences: true, PValues: true, Reference: "r.gpkg",
				PreviewBands: []int{3, 2, 1}, BandsBefore: []int{1, 2, 3, 4, 5, 7}, BandsAfter: []int{2, 3, 4, 5, 6, 7}, SharedOptions: series.SharedOptions{Out: "d", Align: true, Resampling: "average",
					Basis: "p.json", Components: 2, Threshold: sigma, MinArea: jobkit.MinArea{M2: 5000},
					Sample: 5000, Overwrite: true, Normalize: series.NormalizeNone,
					Output: jobkit.OutputFormat{Format: raster.COG, CreationOptions: []string{"LEVEL=9"}}}}, ""},
		{[]string{"a.tif", "b.tif", "--out", "d", "--format", "png"}, pairchange.ChangeOptions{}, `--format "png": want gtiff or cog`},
		{[]string{"a.tif", "b.tif", "--out", "d", "--bands-after", "2-x"}, pairchange.ChangeOptions{}, `--bands-after "2-x"`},
		{[]string{"a.tif", "b.tif", "--out", "d", "--threshold", "magic"}, pairchange.ChangeOptions{}, `--threshold "magic"`},
		{[]string{"a.tif", "b.tif", "--out", "d", "--min-area", "5 acres"}, pairchange.ChangeOptions{}, `--min-area "5 acres"`},
		{[]string{"a.tif", "b.tif", "--out", "d", "--preview-bands", "1,2"}, pairchange.ChangeOptions{}, `--preview-bands "1,2"`},
		{[]string{"a.tif", "b.tif", "--out", "d", "--normalize", "histogram"}, pairchange.ChangeOptions{}, `--normalize "histogram": want stable or none`},
	}
	checkOptions(t, tests, func(argv []string) (pairchange.ChangeOptions, error) {
		fl := &changeFlags{}
		a := parseArgs(t, changeCommand(&globals{}, fl), argv)
		return fl.options(a[0], a[1])
	})
}

func TestTimelineFlagsToOptions(t *testing.T) {
	def, err := change.ParseThreshold(change.DefaultThreshold)
	if err != nil {
		t.Fatal(err)
	}
	tests := []optionCase[timeline.TimelineOptions]{
		{[]string{"a.tif", "b.tif", "c.tif", "--out", "d"}, timeline.TimelineOptions{Scenes: []string{"a.tif", "b.tif", "c.tif"},
			Confirm: timeline.ConfirmLasting, SharedOptions: series.SharedOptions{Out: "d",
				Threshold: def, MinArea: jobkit.MinArea{Px: 4}, Sample: change.DefaultSampleSize, Normalize: series.NormalizeStable, Output: jobkit.OutputFormat{Format: raster.GTiff}}}, ""},
		{[]string{"a.tif", "b.tif", "c.tif", "-o", "d", "--dates", "2016-07-01,2017,20180703", "--basis", "p.json", "-k", "2", "--normalize", "none",
			"--confirm", "none", "--align", "--resampling", "nearest", "--min-area", "0.5ha", "--sample", "5000", "--overwrite"},
			timeline.TimelineOptions{Scenes: []string{"a.tif", "b.tif", "c.tif"}, Dates: []string{"2016-07-01", "2017", "20180703"},
				Confirm: timeline.ConfirmNone, SharedOptions: series.SharedOptions{Out: "d", Basis: "p.json",
					Components: 2, Normalize: series.NormalizeNone, Align: true, Resampling: "nearest", Threshold: def,
					MinArea: jobkit.MinArea{M2: 5000}, Sample: 5000, Overwrite: true, Output: jobkit.OutputFormat{Format: raster.GTiff}}}, ""},
		{[]string{"items.json", "--out", "d", "--assets", "blue,red"}, timeline.TimelineOptions{Scenes: []string{"items.json"},
			Confirm: timeline.ConfirmLasting, SharedOptions: series.SharedOptions{Out: "d",
				Threshold: def, MinArea: jobkit.MinArea{Px: 4}, Sample: change.DefaultSampleSize, Normalize: series.NormalizeStable,
				Input: jobkit.Input{Assets: []string{"blue", "red"}}, Output: jobkit.OutputFormat{Format: raster.GTiff}}}, ""},
		{[]string{"a.tif", "b.tif", "c.tif", "--out", "d", "--threshold", "magic"}, timeline.TimelineOptions{}, `--threshold "magic"`},
		{[]string{"a.tif", "b.tif", "c.tif", "--out", "d", "--normalize", "histogram"}, timeline.TimelineOptions{}, `--normalize "histogram": want stable or none`},
		{[]string{"a.tif", "b.tif", "c.tif", "--out", "d", "--min-area", "5 acres"}, timeline.TimelineOptions{}, `--min-area "5 acres"`},
	}
	checkOptions(t, tests, func(argv []string) (timeline.TimelineOptions, error) {
		fl := &timelineFlags{}
		return fl.options(parseArgs(t, timelineCommand(&globals{}, fl), argv))
	})
}
