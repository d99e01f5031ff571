package transform

import (
	"errors"
	"fmt"
	"math"
	"sort"
)

// BudgetMargin is the share of an error budget that the allocation leaves
// unused, so that the achieved error, measured on the scene, stays below the
// budget although the prediction is an approximation: the allocation aims
// at a mean squared error of (1 - BudgetMargin) x budget², an RMSE of about
// 0.95 x the budget.
const BudgetMargin = 0.1

// ErrBudgetTooSmall is returned when no step can meet a budget: it is below
// what integer codes of the components can represent.
var ErrBudgetTooSmall = errors.New("budget below what the components' integer codes can reach")

// Allocation is a choice of kept components and one quantisation step.
type Allocation struct {
	// Components is the number of leading components kept.
	Components int
	// Step is the quantisation step Δ of every kept component's codes,
	// round(y / Δ).
	Step float64
	// PredictedMSE is the predicted mean squared error per band value:
	// (Σ_{j>k} g_j λ_j' + Σ_{j≤k} g_j Δ²/12) / p.
	PredictedMSE float64
}

// Allocate chooses, for a target mean squared error per band value, the
// kept components and one common quantisation step at the smallest
// estimated size.
//
// Component j has score variance variance[j] (λ_j' = λ_j (n-1)/n, the
// population variance on the fitting scene) and gain[j], the squared error
// summed over the p bands that a unit error of its score causes (1 for
// covariance-mode principal components, whose vectors are orthonormal).
// Dropping j costs g_j λ_j' (the truncation identity); uniform scalar
// quantisation with step Δ costs about g_j Δ²/12 (the high-resolution
// approximation, Gersho & Gray 1992, Vector Quantization and Signal
// Compression, ch. 5). Reverse water-filling for independent Gaussian
// components (Cover & Thomas, Elements of Information Theory, ch. 10) keeps
// the components whose variance exceeds the water level θ = Δ²/12 and
// spends min(λ_j', θ) on each; θ is found by bisection so that
// Σ_j g_j min(λ_j', θ) = p x target, the total being increasing in θ.
//
// minStep bounds how small the step may be (the codes must fit their
// integer type): a target that needs a smaller step is ErrBudgetTooSmall.
func Allocate(variance, gain []float64, p int, target, minStep float64) (Allocation, error) {
	if len(variance) != len(gain) || len(variance) == 0 || p < 1 {
		panic(fmt.Sprintf("transform: Allocate with %d variances, %d gains, %d bands", len(variance), len(gain), p))
	}
	if !(target > 0) || math.IsInf(target, 0) {
		return Allocation{}, fmt.Errorf("target mean squared error %v is not positive", target)
	}
	total := func(theta float64) float64 {
		s := 0.0
		for j, v := range variance {
			s += gain[j] * min(v, theta)
		}
		return s
	}
	want := float64(p) * target
	hi := 0.0
	for _, v := range variance {
		hi = max(hi, v)
	}
	if total(hi) <= want {
		// Dropping every component already meets the budget.
		return Allocation{Components: 0, PredictedMSE: total(hi) / float64(p)}, nil
	}
	lo := 0.0
	for range 200 {
		mid := (lo + hi) / 2
		if total(mid) > want {
			hi = mid
		} else {
			lo = mid
		}
		if hi-lo <= 1e-15*hi {
			break
		}
	}
	theta := lo
	step := math.Sqrt(12 * theta)
	if step < minStep {
		return Allocation{}, fmt.Errorf("step %.3g needed, codes need at least %.3g: %w", step, minStep, ErrBudgetTooSmall)
	}
	// Components are in descending order of variance; keep those above θ.
	order := make([]int, len(variance))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return variance[order[a]] > variance[order[b]] })
	k := 0
	for _, j := range order {
		if variance[j] > theta {
			k++
		}
	}
	return Allocation{Components: k, Step: step, PredictedMSE: Predict(variance, gain, p, k, step)}, nil
}

// Predict is the predicted mean squared error per band value of keeping the
// first k components with quantisation step step (see Allocate).
func Predict(variance, gain []float64, p, k int, step float64) float64 {
	s := 0.0
	for j, v := range variance {
		if j < k {
			s += gain[j] * step * step / 12
		} else {
			s += gain[j] * v
		}
	}
	return s / float64(p)
}

// GaussianRate is the estimated number of bits per pixel of coding the first
// k components at distortion θ each: Σ_{j≤k} ½ log2(λ_j / θ), the rate of a
// Gaussian source at mean squared error θ (Cover & Thomas, ch. 10), zero for
// components at or below θ.
func GaussianRate(variance []float64, k int, theta float64) float64 {
	bits := 0.0
	for _, v := range variance[:k] {
		if v > theta && theta > 0 {
			bits += 0.5 * math.Log2(v/theta)
		}
	}
	return bits
}
