package transform

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

// TestUniformQuantisationError: rounding Gaussian scores of standard
// deviation σ to a step Δ much smaller than σ adds a mean squared error of
// Δ²/12, the variance of a uniform error on (-Δ/2, Δ/2) (Gersho & Gray
// 1992, ch. 5; for σ/Δ >= 5 the high-resolution approximation is exact to
// far below the sampling error). The tolerance is derived from the
// sampling error of a mean of n squared uniform errors: var(e²) = Δ⁴/80 −
// Δ⁴/144 = Δ⁴/180, so the relative standard error of the measured MSE is
// 12/√(180 n) ≈ 0.894/√n; five of those are allowed.
func TestUniformQuantisationError(t *testing.T) {
	const n = 400_000
	rng := rand.New(rand.NewPCG(3, 5))
	for _, c := range []struct{ sigma, step float64 }{{50, 1}, {50, 10}, {1, 0.2}, {3e4, 100}} {
		sum := 0.0
		for range n {
			y := c.sigma * rng.NormFloat64()
			e := math.Round(y/c.step)*c.step - y
			sum += e * e
		}
		got, want := sum/n, c.step*c.step/12
		tol := 5 * 12 / math.Sqrt(180*n)
		if math.Abs(got-want)/want > tol {
			t.Errorf("σ %v Δ %v: MSE %v, want Δ²/12 = %v within %.2g relative", c.sigma, c.step, got, want, tol)
		}
	}
}

// TestAllocateHandWorked: variances 100, 10, 1 with unit gains over p = 3
// bands and a target MSE of 3 per band value: the water level θ with
// min(100, θ) + min(10, θ) + min(1, θ) = 9 is θ = 4, so two components are
// kept with Δ = √(12 θ) = √48 (worked by hand).
func TestAllocateHandWorked(t *testing.T) {
	a, err := Allocate([]float64{100, 10, 1}, []float64{1, 1, 1}, 3, 3, 0)
	if err != nil {
		t.Fatal(err)
	}
	if a.Components != 2 || math.Abs(a.Step-math.Sqrt(48)) > 1e-9 || math.Abs(a.PredictedMSE-3) > 1e-9 {
		t.Errorf("allocation %+v, want 2 components, step √48, predicted MSE 3", a)
	}
}

// TestAllocateMeetsTargets: over targets spread across four decades and
// constructed spectra with unequal gains, the predicted MSE equals the
// target (the water-filling equation holds) and the kept components are
// exactly those above the water level (known by construction).
func TestAllocateMeetsTargets(t *testing.T) {
	variance := []float64{5000, 800, 120, 30, 9, 2, 0.5, 0.1}
	gain := []float64{1, 0.8, 1.3, 1, 2, 0.5, 1, 1}
	p := len(variance)
	for _, target := range []float64{0.01, 0.1, 1, 10, 100} {
		a, err := Allocate(variance, gain, p, target, 0)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(a.PredictedMSE-target) > 1e-9*target {
			t.Errorf("target %v: predicted %v", target, a.PredictedMSE)
		}
		theta := a.Step * a.Step / 12
		for j, v := range variance {
			if kept := j < a.Components; kept != (v > theta) {
				t.Errorf("target %v: component %d (variance %v) kept %v at level %v", target, j+1, v, kept, theta)
			}
		}
	}
}

func TestAllocateRefusals(t *testing.T) {
	if _, err := Allocate([]float64{100, 10}, []float64{1, 1}, 2, 1e-6, 0.1); !errors.Is(err, ErrBudgetTooSmall) {
		t.Errorf("step below the codes' limit: %v, want ErrBudgetTooSmall", err)
	}
	if _, err := Allocate([]float64{100, 10}, []float64{1, 1}, 2, 0, 0); err == nil {
		t.Error("zero target accepted")
	}
	a, err := Allocate([]float64{4, 1}, []float64{1, 1}, 2, 10, 0)
	if err != nil || a.Components != 0 {
		t.Errorf("a target above the total variance: %+v, %v; want no component kept", a, err)
	}
}

// TestGaussianRate: one component of variance 64 at distortion 1 costs
// ½ log2(64) = 3 bits; components at or below the distortion cost nothing
// (Cover & Thomas, ch. 10).
func TestGaussianRate(t *testing.T) {
	if got := GaussianRate([]float64{64, 4, 0.5}, 3, 1); math.Abs(got-(3+1)) > 1e-12 {
		t.Errorf("rate %v bits, want 3 + 1", got)
	}
}
