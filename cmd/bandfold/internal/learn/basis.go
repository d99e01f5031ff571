package learn

import (
	"cmp"
	"math"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/transform"
)

// checkChoice refuses --components and --variance values that cannot be
// right.
func checkChoice(components int, variance float64) error {
	if components < 0 {
		return jobkit.Usagef("--components %d: must be positive", components)
	}
	if components > 0 && variance == 0 {
		return nil // the count is given: no share is needed
	}
	if err := transform.ValidateFraction(variance); err != nil {
		return jobkit.Usagef("--variance %v: must be in (0, 1]", variance)
	}
	return nil
}

// BasisSummary describes a basis: its variance table and the component
// counts of the usual selection rules.
type BasisSummary struct {
	Basis       string    `json:"basis,omitempty"`
	Pixels      int64     `json:"pixels"`
	Bands       int       `json:"bands"`
	BandNames   []string  `json:"band_names"`
	Mode        string    `json:"mode"`
	Eigenvalues []float64 `json:"eigenvalues"`
	Explained   []float64 `json:"explained"`
	Cumulative  []float64 `json:"cumulative"`
	// BrokenStickShares are the expected shares of the broken-stick model.
	BrokenStickShares []float64 `json:"-"`
	Components        int       `json:"components"`
	BrokenStick       int       `json:"broken_stick"`
	Kaiser            *int      `json:"eigenvalue_above_one,omitempty"`
	// Loadings are the eigenvectors of the kept components, component-major:
	// Loadings[i][j] is the loading of band j on component i+1.
	Loadings [][]float64 `json:"loadings"`
	// Method is "pca" or "mnf"; SNR, for MNF, the components'
	// signal-to-noise ratios λ − 1; WavelengthsNM the bands' centre
	// wavelengths when known; Excluded the bands dropped before fitting.
	Method        string               `json:"method"`
	SNR           []float64            `json:"snr,omitempty"`
	WavelengthsNM []float64            `json:"wavelengths_nm,omitempty"`
	Excluded      []transform.Excluded `json:"excluded,omitempty"`
	// SourceBands are the bands of its stack the basis was fitted on.
	SourceBands *transform.SourceBands `json:"source_bands,omitempty"`
	// Rate is the rate–distortion table (inspect): per number of kept
	// components, the truncation RMSE, its PSNR and the estimated bits per
	// pixel at the matching step.
	Rate []transform.RateRow `json:"rate,omitempty"`
}

// Summarize describes basis b read from or written to path.
func Summarize(b *transform.Basis, path string) BasisSummary {
	s := BasisSummary{
		Basis: path, Pixels: b.Pixels, Bands: len(b.Bands), Mode: string(b.Mode),
		Eigenvalues: b.Eigenvalues, Explained: transform.Explained(b.Eigenvalues),
		Cumulative: transform.Cumulative(b.Eigenvalues), Components: b.Components,
		BrokenStick:       transform.BrokenStick(b.Eigenvalues),
		BrokenStickShares: transform.BrokenStickShares(len(b.Eigenvalues)),
		Loadings:          keptLoadings(b),
	}
	for _, band := range b.Bands {
		s.BandNames = append(s.BandNames, band.Name)
	}
	s.Method, s.WavelengthsNM, s.Excluded, s.SourceBands = string(cmp.Or(b.Method, transform.PCA)), b.WavelengthsNM, b.Excluded, b.SourceBands
	if b.Method == transform.MNF {
		s.SNR = transform.SNR(b.Eigenvalues)
	}
	if b.Mode == transform.Correlation {
		k := transform.KaiserCount(b.Eigenvalues)
		s.Kaiser = &k
	}
	return s
}

// fitInput is what fitAny fits a basis to.
type fitInput struct {
	acc, noise *bands.Accumulator // noise: shift differences, for MNF
	mode       transform.Mode
	method     transform.Method
	shift      bands.Shift
	info       []transform.Band
	what       string
}

// fitAny fits a principal component or, for method MNF, a minimum noise
// fraction basis.
func fitAny(env jobkit.Env, in fitInput) (*transform.Basis, error) {
	if in.method == transform.MNF {
		return fitMNF(env, in.acc, in.noise, in.info, in.what, in.shift)
	}
	return jobkit.FitBasis(env, in.acc, in.mode, in.info, in.what)
}

// chooseSNR is choose, except that minSNR > 0 keeps the MNF components
// whose SNR is at least minSNR (when no count is given).
func chooseSNR(b *transform.Basis, k int, fraction, minSNR float64) {
	if k == 0 && minSNR > 0 && b.Method == transform.MNF {
		b.Components = transform.ComponentsForSNR(b.Eigenvalues, minSNR)
		return
	}
	jobkit.Choose(b, k, fraction)
}

// checkSNR refuses a --min-snr that cannot be right: not a finite number of
// 0 or more (0: not given), or given with --components, which it would
// override without a word.
func checkSNR(minSNR float64, components int) error {
	switch {
	case !(minSNR >= 0) || math.IsInf(minSNR, 0):
		return jobkit.Usagef("--min-snr %v: want a finite number, 0 or more", minSNR)
	case minSNR > 0 && components > 0:
		return jobkit.Usagef("--min-snr with --components %d: give one rule for the number of components", components)
	}
	return nil
}

// checkMNF refuses option combinations MNF cannot serve.
func (o *LearnOptions) checkMNF() error {
	switch {
	case o.Method != transform.PCA && o.Method != transform.MNF:
		return jobkit.Usagef("--method %q: want pca or mnf", o.Method)
	case o.Noise != bands.Horizontal && o.Noise != bands.Vertical && o.Noise != bands.Both:
		return jobkit.Usagef("--noise %v: want horizontal, vertical or both", o.Noise)
	case checkSNR(o.MinSNR, o.Components) != nil:
		return checkSNR(o.MinSNR, o.Components)
	case o.MinSNR > 0 && o.Method != transform.MNF:
		return jobkit.Usagef("--min-snr needs --method mnf: principal components have no signal-to-noise ratio")
	}
	if o.Method != transform.MNF && !o.SuggestExclude {
		return nil
	}
	if o.Mode == transform.Correlation {
		return jobkit.Usagef("--mode correlation with --method mnf: MNF components do not depend on band scaling; use covariance")
	}
	if o.Stride > 1 {
		return jobkit.Usagef("--stride %d with --method mnf or --suggest-exclude: the noise estimate needs adjacent pixels", o.Stride)
	}
	return nil
}

// suggest lists the bands whose estimated SNR is below SuggestSNR.
func suggest(acc, noise *bands.Accumulator, s *raster.Stack, numbers []int) *LearnResult {
	res := &LearnResult{Suggest: []BandSNR{}}
	for _, b := range bandSNR(acc, noise, s, numbers) {
		if !(b.SNR >= SuggestSNR) {
			res.Suggest = append(res.Suggest, b)
		}
	}
	return res
}
