// Package change owns bandfold's statistical model of "no change" between two
// dates, the change statistic computed from it and the rules that turn that
// statistic into a change map.
//
// For every pixel the caller forms d = y_after − y_before, the k-vector of
// differences of principal component scores (k is small, 1 to about 20). Over
// pixels where nothing changed d is neither centred nor uncorrelated, so its
// distribution is estimated, robustly against the changed pixels, by Fit:
//
//  1. start from the per-component median m and the scale 1.4826·MAD, giving
//     a diagonal covariance S;
//  2. flag as change every pixel with Z = (d − m)ᵀ S⁻¹ (d − m) > χ²_{k,q}, the
//     q-quantile of the chi-square distribution with k degrees of freedom (q is
//     the trimming quantile, DefaultTrim = 0.999);
//  3. re-estimate m and the full k×k covariance S from the pixels that are not
//     flagged and multiply S by the consistency factor q / F_{k+2}(χ²_{k,q}),
//     F being the chi-square CDF;
//  4. repeat 2 and 3 until fewer than 0.01 % of the pixels change flag, or 30
//     times.
//
// The covariance is hard-trimmed: pixels are in or out, never weighted by the
// p-value of their statistic. Weighting by p-values down-weights the ordinary
// tail of the no-change distribution as well as the changes, so the weighted
// covariance is too small (for k = 3 about 0.58 of the true one, see the
// tests) and a map thresholded at a chi-square quantile floods with false
// alarms.
//
// Where nothing changed, Z is then approximately chi-square with k degrees of
// freedom, like the no-change statistic of the iteratively reweighted MAD
// method (A. A. Nielsen, "The regularized iteratively reweighted MAD method
// for change detection in multi- and hyperspectral data", IEEE Transactions on
// Image Processing 16(2), 2007). PValue gives its upper tail probability.
//
// A Model is fitted once, on a bounded sample of pixels drawn with a Sampler,
// and then scores every pixel through a Scorer, one per worker goroutine.
// Thresholds ("chisq:0.999", "sigma:3", "otsu", "value:25") are parsed by
// ParseThreshold and resolved to a cut-off on Z by Threshold.Resolve. A map
// is compared with reference data by counting a Confusion matrix, whose Rates
// are the usual accuracy measures.
//
// Pixel blocks are pixel-major: n pixels of k components are a []float64 of
// length n·k whose element i·k+j is component j of pixel i.
//
// The package is pure Go on top of gonum and starts no goroutines. It panics,
// with a "change: " prefix, on programmer errors such as mismatched lengths or
// an out-of-range argument; problems with data (too few pixels, a singular
// covariance, non-finite values, an empty sample of statistics) are returned
// as errors, wrapping the sentinel errors of this package where a caller may
// want to branch on them.
package change
