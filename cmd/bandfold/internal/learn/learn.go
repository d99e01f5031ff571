package learn

import (
	"context"
	"fmt"
	"strings"
	"time"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/transform"
)

// LearnOptions are the options of Learn.
type LearnOptions struct {
	// Scenes are IMAGE arguments (files joined with commas form one stack),
	// pooled: they must have the same bands.
	Scenes []string
	Input  jobkit.Input
	// Out is the basis file to write; Partial, instead, the shard's
	// un-decomposed statistics for Merge. Exactly one is set.
	Out, Partial string
	Mode         transform.Mode
	// Components is the number of components to keep; 0 chooses the fewest
	// reaching Variance.
	Components int
	Variance   float64
	// Stride fits on every Stride-th row and column only.
	Stride    int
	Shard     jobkit.Shard
	Overwrite bool

	// Method is PCA (the default) or MNF; Noise the pixel pairs of the
	// noise estimate (default horizontal), used by MNF and SuggestExclude;
	// MinSNR > 0 keeps the MNF components whose SNR is at least MinSNR.
	Method   transform.Method
	Noise    bands.Shift
	MinSNR   float64
	Spectral jobkit.Spectral
	// SuggestExclude lists the bands whose estimated SNR is below
	// SuggestSNR instead of fitting; nothing is written.
	SuggestExclude bool
	// IgnoreBandNames pools scenes whose bands are named differently when
	// they have as many bands (taken in order).
	IgnoreBandNames bool
}

// LearnResult is what Learn wrote.
type LearnResult struct {
	// Basis and Summary are set when a basis was written to Path.
	Basis   *transform.Basis
	Summary BasisSummary
	// Partial is set when partial statistics were written to Path.
	Partial *transform.Partial
	Path    string
	// Suggest lists, with SuggestExclude, the bands under SuggestSNR.
	Suggest []BandSNR
}

func (o *LearnOptions) check() error {
	if len(o.Scenes) == 0 {
		return jobkit.Usagef("no input image")
	}
	if o.Method == "" {
		o.Method = transform.PCA
	}
	if o.Noise == 0 {
		o.Noise = bands.Horizontal
	}
	if err := o.checkMNF(); err != nil {
		return err
	}
	if o.SuggestExclude && (o.Out != "" || o.Partial != "") {
		return jobkit.Usagef("--suggest-exclude lists bands without fitting: give no --out or --partial")
	}
	if !o.SuggestExclude && (o.Out == "") == (o.Partial == "") {
		return jobkit.Usagef("give exactly one of --out and --partial")
	}
	if o.Mode == "" {
		o.Mode = transform.Covariance
	}
	if o.Stride == 0 {
		o.Stride = 1
	}
	if o.Stride < 1 {
		return jobkit.Usagef("--stride %d: must be at least 1", o.Stride)
	}
	if o.Shard.OrWhole().N > 1 && o.Partial == "" {
		return jobkit.Usagef("--shard needs --partial: a shard sees only part of the image, so it cannot write a basis")
	}
	if err := checkChoice(o.Components, o.Variance); err != nil {
		return err
	}
	return o.Input.Check()
}

// Learn accumulates the band covariance of the scenes tile by tile and
// writes a basis (or a shard's partial statistics).
func Learn(ctx context.Context, env jobkit.Env, o LearnOptions) (_ *LearnResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	if o.Scenes, err = jobkit.ExpandImages(o.Scenes); err != nil {
		return nil, err
	}
	if err := o.check(); err != nil {
		return nil, err
	}
	target := o.Out
	if o.Partial != "" {
		target = o.Partial
	}
	if target != "" {
		if err := output.Distinct(jobkit.ArgPaths("input", o.Scenes, o.Input.Masks), []output.Path{{Role: "output", Path: target}}); err != nil {
			return nil, err
		}
		if err := output.Check(target, o.Overwrite); err != nil {
			return nil, err
		}
	}
	scenes := make([]*raster.Stack, 0, len(o.Scenes))
	defer func() {
		for _, s := range scenes {
			s.Close()
		}
	}()
	for _, a := range o.Scenes {
		s, err := jobkit.OpenImage(a, o.Input.Options())
		if err != nil {
			return nil, err
		}
		for _, n := range s.Notes {
			env.Warn("%s", n)
		}
		scenes = append(scenes, s)
	}
	if err := jobkit.DistinctFromStacks(scenes, output.Path{Role: "output", Path: target}); err != nil && target != "" {
		return nil, err
	}
	if w := o.Spectral.WavelengthsFile; w != "" && target != "" {
		// The wavelengths file is read too: never written over.
		if err := output.Distinct([]output.Path{{Role: "wavelengths", Path: w}}, []output.Path{{Role: "output", Path: target}}); err != nil {
			return nil, err
		}
	}
	if err := jobkit.CheckPooled(scenes, o.IgnoreBandNames); err != nil {
		return nil, err
	}
	sel, err := o.Spectral.SelectBands(scenes)
	if err != nil {
		return nil, err
	}
	opened := scenes
	scenes = sel.Scenes
	if err := jobkit.NeedTwoBands(opened[0], o.Input.Bands); err != nil {
		return nil, err
	}
	p := scenes[0].Len()
	if o.Components > p {
		return nil, jobkit.Usagef("--components %d: the images have only %d bands", o.Components, p)
	}
	inputs, err := jobkit.Fingerprints(scenes)
	if err != nil {
		return nil, err
	}
	source, err := jobkit.SourceOf(opened[0], o.Input, sel.Numbers)
	if err != nil {
		return nil, err
	}
	sh := o.Shard.OrWhole()
	sc := jobkit.NewScan(scenes, jobkit.TileGrid(o.Input.Tile), o.Stride, sh)
	env.Logger().Debug("learn", "scenes", len(scenes), "bands", p, "tiles", len(sc.Items), "shard", sh.String())
	var acc, noise *bands.Accumulator
	if o.Method == transform.MNF || o.SuggestExclude {
		acc, noise, err = momentsAndNoise(ctx, sc, env, o.Noise)
	} else {
		acc, err = sc.Moments(ctx, env)
	}
	if err != nil {
		return nil, err
	}
	if err := sumsFinite(jobkit.DescribeAll(scenes), acc, noise); err != nil {
		return nil, err
	}
	if o.SuggestExclude {
		return suggest(acc, noise, scenes[0], sel.Numbers), nil
	}
	if acc.Count() == 0 && sh.N == 1 && o.Stride == 1 {
		return nil, jobkit.NoValidPixels(ctx, env, scenes[0], o.Input.Tile)
	}
	if o.Partial != "" {
		part := &transform.Partial{
			Format: transform.PartialFormat, Version: transform.LatestVersion, Created: time.Now().UTC(),
			Shard: sh.I, Shards: sh.N, TileSize: o.Input.Tile, Stride: o.Stride,
			Mode: o.Mode, Bands: jobkit.BasisBands(scenes[0]), Inputs: inputs,
			State: acc.State(), Tool: env.Version,
			Method: o.Method, WavelengthsNM: sel.Wavelengths, Excluded: sel.Excluded, SourceBands: source,
		}
		if noise != nil {
			st := noise.State()
			part.Noise, part.NoiseState = o.Noise.String(), &st
		}
		data, err := part.Marshal()
		if err != nil {
			return nil, fmt.Errorf("write partial %s: %w", o.Partial, err)
		}
		if err := output.WriteFile(o.Partial, data, o.Overwrite); err != nil {
			return nil, err
		}
		return &LearnResult{Partial: part, Path: o.Partial}, nil
	}
	b, err := fitAny(env, fitInput{acc: acc, noise: noise, mode: o.Mode, method: o.Method, shift: o.Noise,
		info: jobkit.BasisBands(scenes[0]), what: jobkit.DescribeAll(scenes)})
	if err != nil {
		return nil, err
	}
	b.Stride = o.Stride
	b.Inputs = inputs
	b.WavelengthsNM, b.Excluded, b.SourceBands = sel.Wavelengths, sel.Excluded, source
	chooseSNR(b, o.Components, o.Variance, o.MinSNR)
	if err := jobkit.WriteBasis(b, o.Out, o.Overwrite); err != nil {
		return nil, err
	}
	return &LearnResult{Basis: b, Summary: Summarize(b, o.Out), Path: o.Out}, nil
}

// MergeOptions are the options of Merge.
type MergeOptions struct {
	Parts      []string
	Out        string
	Components int
	Variance   float64
	MinSNR     float64
	Overwrite  bool
}

// Merge combines the partial statistics of all shards into a basis.
func Merge(_ context.Context, env jobkit.Env, o MergeOptions) (_ *LearnResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	if err := checkChoice(o.Components, o.Variance); err != nil {
		return nil, err
	}
	if err := checkSNR(o.MinSNR, o.Components); err != nil {
		return nil, err
	}
	if len(o.Parts) == 0 {
		return nil, jobkit.Usagef("no partial file")
	}
	var ins []output.Path
	for _, p := range o.Parts {
		ins = append(ins, output.Path{Role: "partial", Path: p})
	}
	if err := output.Distinct(ins, []output.Path{{Role: "output", Path: o.Out}}); err != nil {
		return nil, err
	}
	if err := output.Check(o.Out, o.Overwrite); err != nil {
		return nil, err
	}
	parts := make([]*transform.Partial, len(o.Parts))
	for i, p := range o.Parts {
		part, err := transform.ReadPartial(p)
		if err != nil {
			return nil, err
		}
		parts[i] = part
	}
	total, err := transform.Combine(parts, o.Parts)
	if err != nil {
		return nil, fmt.Errorf("partials %s: %w", strings.Join(o.Parts, ", "), err)
	}
	first := parts[0]
	if o.MinSNR > 0 && first.Method != transform.MNF {
		return nil, jobkit.Usagef("--min-snr needs partials of learn --method mnf: %s holds principal component statistics, which have no signal-to-noise ratio", o.Parts[0])
	}
	if o.Components > len(first.Bands) {
		return nil, jobkit.Usagef("--components %d: the partials have only %d bands", o.Components, len(first.Bands))
	}
	noise, err := transform.CombineNoise(parts, o.Parts)
	if err != nil {
		return nil, err
	}
	shift, _ := bands.ParseShift(first.Noise)
	b, err := fitAny(env, fitInput{acc: total, noise: noise, mode: first.Mode, method: first.Method, shift: shift,
		info: append([]transform.Band(nil), first.Bands...), what: fmt.Sprintf("the %d partial files", len(parts))})
	if err != nil {
		return nil, err
	}
	b.Stride = first.Stride
	b.Inputs = first.Inputs
	b.WavelengthsNM, b.Excluded, b.SourceBands = first.WavelengthsNM, first.Excluded, first.SourceBands
	chooseSNR(b, o.Components, o.Variance, o.MinSNR)
	if err := jobkit.WriteBasis(b, o.Out, o.Overwrite); err != nil {
		return nil, err
	}
	return &LearnResult{Basis: b, Summary: Summarize(b, o.Out), Path: o.Out}, nil
}
