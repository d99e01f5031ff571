package transform

import (
	"fmt"
	"math"
)

// Int16NoData is the Int16 value reserved for nodata in component images;
// valid scores are stored in -32767..32767.
const Int16NoData int16 = math.MinInt16

const (
	int16Max    = math.MaxInt16 // largest stored magnitude of a valid score
	int16Sigmas = 16            // standard deviations mapped onto int16Max
)

// Int16Scaling returns the scale and offset for storing the scores of a
// component of variance eigenvalue as Int16, with GDAL's convention
// score = stored·scale + offset.
//
// Scores are centred, so offset is 0, and ±16 standard deviations,
// σ = √eigenvalue, map onto ±32767:
//
//	scale = 16σ / 32767 ≈ 4.88e-4 σ.
//
// The quantisation step is scale, and rounding adds an error of at most
// scale/2, root mean square scale/√12 ≈ 1.41e-4 σ, far below what dropping
// components costs. Scores beyond ±16σ, which even a heavy-tailed scene
// rarely reaches (by Chebyshev's inequality at most 1/256 of any
// distribution), saturate at ±32767; Int16NoData (-32768) stays free for
// nodata. A zero eigenvalue gives scale 1: its scores are zero up to rounding.
//
// Int16Scaling panics if eigenvalue is negative or not finite.
func Int16Scaling(eigenvalue float64) (scale, offset float64) {
	if !(eigenvalue >= 0) || math.IsInf(eigenvalue, 1) {
		panic(fmt.Sprintf("transform: Int16Scaling of eigenvalue %v", eigenvalue))
	}
	if eigenvalue == 0 {
		return 1, 0
	}
	return int16Sigmas * math.Sqrt(eigenvalue) / int16Max, 0
}

// QuantizeInt16 returns the Int16 value storing score v with the given scale
// and offset: round((v − offset) / scale), rounding half away from zero and
// saturating at ±32767. NaN maps to Int16NoData.
func QuantizeInt16(v, scale, offset float64) int16 {
	if math.IsNaN(v) {
		return Int16NoData
	}
	q := math.Round((v - offset) / scale)
	return int16(max(-int16Max, min(int16Max, q)))
}

// ScoreBound returns the largest magnitude the score of component i can take
// for a pixel whose bands lie within the range seen while fitting,
// [Band.Min, Band.Max]:
//
//	bound_i = sum_j |w_ij| max(|Min_j - mean_j|, |Max_j - mean_j|) / s_j
//
// with s_j = 1 in covariance mode and the band standard deviation in
// correlation mode. It is 0 when the basis records no range.
func (b *Basis) ScoreBound(i int) float64 {
	bound := 0.0
	for j, w := range b.Eigenvectors[i] {
		dev := max(math.Abs(b.Bands[j].Min-b.Mean[j]), math.Abs(b.Bands[j].Max-b.Mean[j])) / b.scale(j)
		bound += math.Abs(w) * dev
	}
	return bound
}

// Int16Scaling returns the scale and offset for storing component i's scores
// as Int16: those of the package-level Int16Scaling (±16 standard
// deviations), widened to ScoreBound(i) when that is larger, so that no
// pixel within the fitted range saturates, however heavy the component's
// tails (a small component of a scene with saturated or cloudy pixels can
// reach far beyond 16 standard deviations).
func (b *Basis) Int16Scaling(i int) (scale, offset float64) {
	scale, offset = Int16Scaling(b.Eigenvalues[i])
	if bound := b.ScoreBound(i); bound/int16Max > scale {
		scale = bound / int16Max
	}
	return scale, offset
}
