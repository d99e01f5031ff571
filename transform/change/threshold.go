package change

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/stat/distuv"
)

// The threshold rules, as written before the colon in a threshold string.
const (
	// RuleChiSq "chisq:Q" cuts Z at the Q-quantile of the chi-square
	// distribution with k degrees of freedom.
	RuleChiSq = "chisq"
	// RuleSigma "sigma:N" cuts sqrt(Z) at its mean plus N standard
	// deviations over a sample of pixels.
	RuleSigma = "sigma"
	// RuleOtsu "otsu" cuts Z by Otsu's method on a histogram of log(1+Z).
	RuleOtsu = "otsu"
	// RuleValue "value:Z" cuts Z at the given value.
	RuleValue = "value"
)

// DefaultThreshold is the threshold used when none is given.
const DefaultThreshold = "chisq:0.999"

// OtsuBins is the number of bins of the histogram of log(1+Z) that the otsu
// rule splits.
const OtsuBins = 256

// ErrNoScores is returned by Threshold.Resolve when a rule that needs a sample
// of Z values (sigma, otsu) is given fewer than two.
var ErrNoScores = errors.New("too few Z values to resolve threshold")

const thresholdForms = "chisq:Q, sigma:N, otsu or value:Z"

// Threshold is a rule for the cut-off on Z above which a pixel is mapped as
// changed. Make one with ParseThreshold.
type Threshold struct {
	// Rule is one of RuleChiSq, RuleSigma, RuleOtsu and RuleValue.
	Rule string
	// Param is the number after the colon: the quantile Q in (0, 1) for
	// chisq, the number of standard deviations N > 0 for sigma, the cut-off
	// Z ≥ 0 for value; 0 for otsu.
	Param float64
}

// ParseThreshold parses a threshold written as "chisq:Q", "sigma:N", "otsu" or
// "value:Z". The rule name is lower case and the number is a Go
// floating-point literal. It returns an error, quoting s, for an unknown rule,
// a missing, malformed or non-finite number, a number after otsu, a chisq
// quantile not in (0, 1), a sigma multiple ≤ 0 or a negative Z value.
func ParseThreshold(s string) (Threshold, error) {
	if s == "" {
		return Threshold{}, fmt.Errorf("empty threshold (want %s)", thresholdForms)
	}
	rule, arg, hasArg := strings.Cut(s, ":")
	switch rule {
	case RuleOtsu:
		if hasArg {
			return Threshold{}, fmt.Errorf("threshold %q: otsu takes no number", s)
		}
		return Threshold{Rule: RuleOtsu}, nil
	case RuleChiSq, RuleSigma, RuleValue:
	default:
		return Threshold{}, fmt.Errorf("threshold %q: unknown rule %q (want %s)", s, rule, thresholdForms)
	}
	if arg == "" {
		return Threshold{}, fmt.Errorf("threshold %q: missing number after %q", s, rule+":")
	}
	v, err := strconv.ParseFloat(arg, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return Threshold{}, fmt.Errorf("threshold %q: bad number %q", s, arg)
	}
	if v == 0 {
		v = 0 // no "-0"
	}
	t := Threshold{Rule: rule, Param: v}
	if err := t.check(); err != nil {
		return Threshold{}, fmt.Errorf("threshold %q: %v", s, err)
	}
	return t, nil
}

// check reports whether t is a valid threshold.
func (t Threshold) check() error {
	v := t.Param
	switch t.Rule {
	case RuleChiSq:
		if !(v > 0 && v < 1) {
			return fmt.Errorf("quantile %v not in (0, 1)", v)
		}
	case RuleSigma:
		if !(v > 0) || math.IsInf(v, 1) {
			return fmt.Errorf("sigma multiple %v must be > 0 and finite", v)
		}
	case RuleValue:
		if !(v >= 0) || math.IsInf(v, 1) {
			return fmt.Errorf("Z value %v must be >= 0 and finite", v)
		}
	case RuleOtsu:
		if v != 0 {
			return fmt.Errorf("otsu takes no number, have %v", v)
		}
	default:
		return fmt.Errorf("unknown rule %q (want %s)", t.Rule, thresholdForms)
	}
	return nil
}

// String returns t in the form read by ParseThreshold, with the shortest
// decimal that parses back to the same Param.
func (t Threshold) String() string {
	if t.Rule == RuleOtsu {
		return RuleOtsu
	}
	return t.Rule + ":" + strconv.FormatFloat(t.Param, 'g', -1, 64)
}

// MarshalJSON writes t as its String, the form --threshold takes (a run's
// recorded options name it as the user gave it).
func (t Threshold) MarshalJSON() ([]byte, error) { return json.Marshal(t.String()) }

// Trim returns the trimming quantile Fit should use with this threshold: Param
// for a chisq rule, so that the pixels left out of the no-change estimate are
// exactly those the map will flag under a correct model, and DefaultTrim
// (0.999) for the other rules, which say nothing about the no-change
// distribution.
func (t Threshold) Trim() float64 {
	if t.Rule == RuleChiSq {
		return t.Param
	}
	return DefaultTrim
}

// Resolve returns the cut-off on Z of the threshold for k components: pixels
// with Z above it are changed. zs is a sample of Z values over the image (for
// example Model.Scores of the pixels the model was fitted on); only the sigma
// and otsu rules use it, and for them it must hold at least two values, all
// finite and ≥ 0.
//
//   - chisq:Q gives χ²_{k,Q}, the Q-quantile of the chi-square distribution
//     with k degrees of freedom (gonum's distuv.ChiSquared.Quantile).
//   - sigma:N gives (μ + N·σ)², where μ and σ are the mean and standard
//     deviation (divisor n−1) of sqrt(Z) over zs: the rule is applied to
//     sqrt(Z), the Mahalanobis distance, and squared back onto Z.
//   - otsu bins log(1+Z) over zs into OtsuBins equal bins spanning its minimum
//     to its maximum, splits the histogram with Otsu, and gives the Z at the
//     upper edge of the last bin of the lower class.
//   - value:Z gives Z.
//
// Resolve returns an error wrapping ErrNoScores if zs is too short, and an
// error if a value of zs is negative or not finite or, for otsu, if all are
// equal. It panics if k < 1 or t is not a valid threshold.
func (t Threshold) Resolve(k int, zs []float64) (float64, error) {
	if k < 1 {
		panic(fmt.Sprintf("change: k = %d < 1", k))
	}
	if err := t.check(); err != nil {
		panic("change: invalid threshold: " + err.Error())
	}
	switch t.Rule {
	case RuleChiSq:
		return distuv.ChiSquared{K: float64(k)}.Quantile(t.Param), nil
	case RuleValue:
		return t.Param, nil
	}
	if len(zs) < 2 {
		return 0, fmt.Errorf("%w: %s needs at least 2, have %d", ErrNoScores, t.Rule, len(zs))
	}
	for i, z := range zs {
		if !(z >= 0) || math.IsInf(z, 1) {
			return 0, fmt.Errorf("Z value %v at %d is not finite and >= 0", z, i)
		}
	}
	if t.Rule == RuleSigma {
		var mean float64
		for _, z := range zs {
			mean += math.Sqrt(z)
		}
		mean /= float64(len(zs))
		var ss float64
		for _, z := range zs {
			r := math.Sqrt(z) - mean
			ss += r * r
		}
		c := mean + t.Param*math.Sqrt(ss/float64(len(zs)-1))
		return c * c, nil
	}

	lo, width, hist, err := logHistogram(zs)
	if err != nil {
		return 0, err
	}
	// Bins 0 and OtsuBins-1 both hold values, so a split exists.
	b := Otsu(hist)
	return math.Expm1(lo + float64(b+1)*width), nil
}

// logHistogram bins log(1+Z) over zs into OtsuBins equal bins spanning its
// minimum to its maximum.
func logHistogram(zs []float64) (lo, width float64, hist []float64, err error) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, z := range zs {
		x := math.Log1p(z)
		lo, hi = min(lo, x), max(hi, x)
	}
	if !(hi > lo) {
		return 0, 0, nil, fmt.Errorf("otsu: all %d Z values are equal", len(zs))
	}
	width = (hi - lo) / OtsuBins
	hist = make([]float64, OtsuBins)
	for _, z := range zs {
		hist[min(int((math.Log1p(z)-lo)/width), OtsuBins-1)]++
	}
	return lo, width, hist, nil
}

// OtsuSeparability is Otsu's separability measure η = σ²_B / σ²_T of the
// histogram of log(1+Z) over zs split where the otsu rule splits it (Otsu
// 1979, section II): 1 for two perfectly separated classes, 0.75 for a
// uniform histogram, about 2/π ≈ 0.64 for a single Gaussian split at its
// mean. It returns an error as Resolve does for otsu.
func OtsuSeparability(zs []float64) (float64, error) {
	if len(zs) < 2 {
		return 0, fmt.Errorf("%w: otsu needs at least 2, have %d", ErrNoScores, len(zs))
	}
	_, _, hist, err := logHistogram(zs)
	if err != nil {
		return 0, err
	}
	return Eta(hist, Otsu(hist)), nil
}

// OtsuBound is the separability below which an Otsu split is not to be
// trusted: a histogram that separates no better than a uniform one (η =
// 0.75) has no two classes to split.
const OtsuBound = 0.75

// Eta returns σ²_B(t) / σ²_T of hist split into bins 0..t and t+1..end
// (Otsu 1979), or 0 when the histogram has no variance or t is out of range.
func Eta(hist []float64, t int) float64 {
	if t < 0 || t >= len(hist)-1 {
		return 0
	}
	var n, s, ss float64
	for i, h := range hist {
		n += h
		s += float64(i) * h
		ss += float64(i) * float64(i) * h
	}
	if n == 0 {
		return 0
	}
	mean := s / n
	total := ss/n - mean*mean
	if !(total > 0) {
		return 0
	}
	var n0, s0 float64
	for i := 0; i <= t; i++ {
		n0 += hist[i]
		s0 += float64(i) * hist[i]
	}
	n1 := n - n0
	if n0 == 0 || n1 == 0 {
		return 0
	}
	d := s0/n0 - (s-s0)/n1
	return (n0 / n) * (n1 / n) * d * d / total
}

// Otsu returns the index t that maximises the between-class variance of the
// histogram hist split into the classes of bins 0..t and t+1..len(hist)−1
// (N. Otsu, "A threshold selection method from gray-level histograms", IEEE
// Transactions on Systems, Man, and Cybernetics 9(1), 1979). With n₀, n₁ the
// masses and μ₀, μ₁ the mean bin indices of the two classes, the criterion is
//
//	σ²_B(t) = n₀·n₁·(μ₀ − μ₁)² / (n₀ + n₁)²,
//
// equivalently, the split minimises the within-class variance. The masses
// and means of both classes are summed from their own side of the split, so
// that σ²_B is exactly constant across a run of empty bins; when the maximum
// is reached on such a run (a gap between two modes) Otsu returns the middle
// of the run, (first+last)/2, rather than its first index.
//
// Otsu returns −1 if no split leaves mass on both sides (fewer than two
// non-empty bins). It panics if len(hist) < 2 or an entry is negative or not
// finite.
func Otsu(hist []float64) int {
	if len(hist) < 2 {
		panic(fmt.Sprintf("change: histogram of %d bins, need at least 2", len(hist)))
	}
	for i, h := range hist {
		if !(h >= 0) || math.IsInf(h, 1) {
			panic(fmt.Sprintf("change: histogram bin %d holds %v", i, h))
		}
	}
	nt := len(hist) - 1 // number of candidate splits
	// Upper class sums, from the top.
	n1 := make([]float64, nt)
	s1 := make([]float64, nt)
	var n, s float64
	for t := nt - 1; t >= 0; t-- {
		h := hist[t+1]
		n += h
		s += float64(t+1) * h
		n1[t], s1[t] = n, s
	}
	best, first, last := 0.0, -1, -1
	n, s = 0, 0
	for t := range nt {
		h := hist[t]
		n += h
		s += float64(t) * h
		if n == 0 || n1[t] == 0 {
			continue
		}
		d := s/n - s1[t]/n1[t]
		tot := n + n1[t]
		sb := n * n1[t] * d * d / (tot * tot)
		switch {
		case sb > best || first < 0:
			best, first, last = sb, t, t
		case sb == best && last == t-1:
			last = t
		}
	}
	if first < 0 {
		return -1
	}
	return (first + last) / 2
}
