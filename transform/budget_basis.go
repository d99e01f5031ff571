package transform

import (
	"errors"
	"fmt"
	"math"
)

// ErrNoNoiseEstimate is returned by NoiseRMS for a basis without a noise
// covariance.
var ErrNoNoiseEstimate = errors.New("the basis has no noise estimate")

// BudgetGains returns, per component j, the squared error summed over the p
// bands that a unit error of its score causes after the inverse transform,
// g_j = ‖u_j‖², with u_j the column of the reconstruction x̂ = mean + U y
// (see Projector):
//
//	covariance-mode PCA  u_j = w_j,          g_j = Σ_b w_bj² = 1
//	correlation mode     u_j = s ∘ w_j,      g_j = Σ_b s_b² w_bj²
//	MNF                  u_j = Σ_N a_j,      g_j = Σ_b (Σ_N a_j)_b²
//
// (s_b the band standard deviations, a_j column j of A, so that
// A⁻ᵀ = Σ_N A). The scores are uncorrelated on the fitting scene, so the
// band-space error of dropping or quantising components is the g-weighted
// sum of their score errors, whether or not the u_j are orthogonal.
func (b *Basis) BudgetGains() []float64 {
	p := len(b.Bands)
	g := make([]float64, len(b.Eigenvectors))
	for j, w := range b.Eigenvectors {
		for band := range p {
			u := w[band] * b.scale(band)
			if b.Method == MNF {
				u = 0
				for l, nl := range b.NoiseCovariance[band] {
					u += nl * w[l]
				}
			}
			g[j] += u * u
		}
	}
	return g
}

// BudgetVariances returns the population variances of the component scores
// on the fitting scene, λ_j (n−1)/n: the eigenvalues are sample variances
// (n−1 denominator) and the truncation error is a mean over the n pixels.
func (b *Basis) BudgetVariances() []float64 {
	f := 1.0
	if b.Pixels > 1 {
		f = float64(b.Pixels-1) / float64(b.Pixels)
	}
	v := make([]float64, len(b.Eigenvalues))
	for j, l := range b.Eigenvalues {
		v[j] = max(l, 0) * f
	}
	return v
}

// NoiseRMS returns the root mean square of the per-band noise standard
// deviations, √(Σ_b (Σ_N)_bb / p), the error of the sensor itself: a
// budget at this level keeps the compression error below the noise. It
// returns ErrNoNoiseEstimate when the basis holds no noise covariance.
func (b *Basis) NoiseRMS() (float64, error) {
	if len(b.NoiseCovariance) != len(b.Bands) || len(b.Bands) == 0 {
		return 0, ErrNoNoiseEstimate
	}
	s := 0.0
	for j, row := range b.NoiseCovariance {
		s += row[j]
	}
	return math.Sqrt(s / float64(len(b.Bands))), nil
}

// PeakRange returns the peak of the overall PSNR of a reconstruction: the
// largest band range Max − Min of the valid values recorded in the basis.
func (b *Basis) PeakRange() float64 {
	peak := 0.0
	for _, bd := range b.Bands {
		peak = max(peak, bd.Max-bd.Min)
	}
	return peak
}

// CodeType is a signed integer type for quantised component codes: its GDAL
// name, its smallest value (reserved for nodata) and its largest.
type CodeType struct {
	Name     string
	NoData   float64
	MaxValue float64
}

// CodeTypes are the code types from the smallest.
var CodeTypes = []CodeType{
	{"Int8", math.MinInt8, math.MaxInt8},
	{"Int16", math.MinInt16, math.MaxInt16},
	{"Int32", math.MinInt32, math.MaxInt32},
}

// MinCodeStep returns the smallest step at which the codes of every
// component of b, round(y/Δ) for scores within the fitted range (see
// ScoreBound), fit Int32 with its minimum reserved.
func (b *Basis) MinCodeStep() float64 {
	bound := 0.0
	for i := range b.Eigenvectors {
		bound = max(bound, b.ScoreBound(i))
	}
	return bound / (math.MaxInt32 - 1)
}

// ChooseCodeType returns the smallest signed integer type that holds the
// codes round(y/step) of the first k components for every score within the
// fitted range, ±round(ScoreBound(i)/step), keeping the type's minimum free
// for nodata. It returns an error when even Int32 cannot.
func (b *Basis) ChooseCodeType(k int, step float64) (CodeType, error) {
	top := 0.0
	for i := range k {
		top = max(top, math.Round(b.ScoreBound(i)/step))
	}
	for _, t := range CodeTypes {
		if top <= t.MaxValue {
			return t, nil
		}
	}
	return CodeType{}, fmt.Errorf("codes up to %.0f at step %.3g: %w", top, step, ErrBudgetTooSmall)
}

// Code returns the stored code of score y at step: round(y/step), rounding
// half away from zero and saturating at ±t.MaxValue, so that t.NoData stays
// free.
func (t CodeType) Code(y, step float64) float64 {
	return max(-t.MaxValue, min(t.MaxValue, math.Round(y/step)))
}

// RateRow is one row of a basis's rate–distortion table: keeping the first
// K components, quantised at the largest water level that keeps exactly
// those (θ = λ'_{K+1}, the next component's variance; λ'_K for K = p).
type RateRow struct {
	K int `json:"k"`
	// TruncationRMSE is √(Σ_{j>K} g_j λ'_j / p), the error of dropping the
	// other components; PSNR its peak signal-to-noise ratio (peak
	// PeakRange), nil where the error is zero.
	TruncationRMSE float64  `json:"truncation_rmse"`
	PSNR           *float64 `json:"psnr_db"`
	// Step is the quantisation step √(12 θ), RMSE the predicted error with
	// it (see Predict) and BitsPerPixel the Gaussian rate at θ (see
	// GaussianRate).
	Step         float64 `json:"step"`
	RMSE         float64 `json:"rmse"`
	BitsPerPixel float64 `json:"bits_per_pixel"`
	// SizeRatio is the estimated size ratio, the bits per pixel of the
	// bands' stored types against BitsPerPixel; nil where either is
	// unknown or zero.
	SizeRatio *float64 `json:"size_ratio"`
}

// RateTable returns the rate–distortion table of b, one row per K = 1..p.
func (b *Basis) RateTable() []RateRow {
	v, g, p := b.BudgetVariances(), b.BudgetGains(), len(b.Bands)
	peak := b.PeakRange()
	raw := 0.0
	for _, bd := range b.Bands {
		raw += float64(typeBits(bd.DataType))
	}
	rows := make([]RateRow, len(v))
	for k := 1; k <= len(v); k++ {
		theta := v[len(v)-1]
		if k < len(v) {
			theta = v[k]
		}
		step := math.Sqrt(12 * theta)
		r := RateRow{K: k, Step: step, TruncationRMSE: math.Sqrt(Predict(v, g, p, k, 0)),
			RMSE: math.Sqrt(Predict(v, g, p, k, step)), BitsPerPixel: GaussianRate(v, k, theta)}
		if ps := PSNR(r.TruncationRMSE*r.TruncationRMSE, peak); finite(ps) {
			r.PSNR = &ps
		}
		if raw > 0 && r.BitsPerPixel > 0 {
			ratio := raw / r.BitsPerPixel
			r.SizeRatio = &ratio
		}
		rows[k-1] = r
	}
	return rows
}

// typeBits returns the bits of a GDAL data type name, 0 when unknown.
func typeBits(dataType string) int {
	switch dataType {
	case "Byte", "Int8":
		return 8
	case "Int16", "UInt16":
		return 16
	case "Int32", "UInt32", "Float32":
		return 32
	case "Float64", "Int64", "UInt64":
		return 64
	}
	return 0
}
