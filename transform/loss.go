package transform

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
)

// Loss accumulates the reconstruction error of pixels, tile by tile. Each
// worker can fill its own Loss and the results be merged in tile order, which
// makes the report independent of the number of workers. Sums are
// compensated (Neumaier), so they keep full precision over billions of
// pixels.
type Loss struct {
	p      int
	n      int64     // valid pixels
	sse    []Sum     // per band Σ (x − x̂)²
	lo, hi []float64 // per band extremes of the original
	maxAbs float64
	sam    Sum // Σ spectral angle, radians
}

// LossReport summarises a Loss. Its JSON form is part of bandfold's output.
type LossReport struct {
	// RMSE is the root mean square error over all valid pixels and bands.
	RMSE float64 `json:"rmse"`
	// BandRMSE is the root mean square error of each band.
	BandRMSE []float64 `json:"band_rmse"`
	// PSNR is the peak signal-to-noise ratio of each band in dB (see PSNR),
	// with the band's peak the range max − min of its original valid values.
	// It is nil for a band whose error or range is zero, where it is not
	// finite.
	PSNR []*float64 `json:"band_psnr_db"`
	// MeanPSNR is the mean of the non-nil PSNR values, nil if there are
	// none.
	MeanPSNR *float64 `json:"mean_psnr_db"`
	// MeanSAM is the mean over valid pixels of the spectral angle between
	// the original and the reconstructed spectrum (see SpectralAngle), in
	// degrees.
	MeanSAM float64 `json:"mean_sam_deg"`
	// MaxAbs is the largest absolute error of any band at any valid pixel.
	MaxAbs float64 `json:"max_abs_error"`
}

// NewLoss returns an empty Loss for pixels of p bands. It panics if p is not
// positive.
func NewLoss(p int) *Loss {
	if p <= 0 {
		panic("transform: NewLoss: non-positive band count")
	}
	l := &Loss{p: p, sse: make([]Sum, p), lo: make([]float64, p), hi: make([]float64, p)}
	for j := range p {
		l.lo[j], l.hi[j] = math.Inf(1), math.Inf(-1)
	}
	return l
}

// Add accumulates the error of the reconstruction recon of the pixels orig,
// both pixel-major blocks of n = len(orig)/p pixels. Only pixels with
// valid[i] set count; a nil valid means all pixels are valid. Valid pixels
// must be finite. Add panics if the lengths disagree.
func (l *Loss) Add(orig, recon []float64, valid []bool) {
	p := l.p
	if len(orig)%p != 0 || len(recon) != len(orig) {
		panic(fmt.Sprintf("transform: Loss.Add: %d original and %d reconstructed values for %d bands", len(orig), len(recon), p))
	}
	n := len(orig) / p
	if valid != nil && len(valid) != n {
		panic(fmt.Sprintf("transform: Loss.Add: %d validity flags for %d pixels", len(valid), n))
	}
	for i := range n {
		if valid != nil && !valid[i] {
			continue
		}
		x, xh := orig[i*p:(i+1)*p], recon[i*p:(i+1)*p]
		for j := range p {
			e := x[j] - xh[j]
			l.sse[j].Add(e * e)
			l.maxAbs = max(l.maxAbs, math.Abs(e))
			l.lo[j] = min(l.lo[j], x[j])
			l.hi[j] = max(l.hi[j], x[j])
		}
		l.sam.Add(SpectralAngle(x, xh))
		l.n++
	}
}

// Merge adds the pixels accumulated by o to l. It panics if the band counts
// differ.
func (l *Loss) Merge(o *Loss) {
	if o.p != l.p {
		panic("transform: Loss.Merge: band count mismatch")
	}
	for j := range l.p {
		l.sse[j].merge(o.sse[j])
		l.lo[j] = min(l.lo[j], o.lo[j])
		l.hi[j] = max(l.hi[j], o.hi[j])
	}
	l.maxAbs = max(l.maxAbs, o.maxAbs)
	l.sam.merge(o.sam)
	l.n += o.n
}

// Pixels returns the number of valid pixels accumulated.
func (l *Loss) Pixels() int64 { return l.n }

// Report returns the loss metrics of the pixels accumulated so far. With no
// pixel, every error is zero and every PSNR nil.
func (l *Loss) Report() LossReport {
	r := LossReport{
		BandRMSE: make([]float64, l.p),
		PSNR:     make([]*float64, l.p),
		MaxAbs:   l.maxAbs,
	}
	if l.n == 0 {
		return r
	}
	n := float64(l.n)
	var total Sum
	var psnrSum float64
	var bands int
	for j := range l.p {
		sse := l.sse[j].Value()
		total.Add(sse)
		mse := sse / n
		r.BandRMSE[j] = math.Sqrt(mse)
		if v := PSNR(mse, l.hi[j]-l.lo[j]); finite(v) {
			r.PSNR[j] = new(v)
			psnrSum += v
			bands++
		}
	}
	r.RMSE = math.Sqrt(total.Value() / (n * float64(l.p)))
	if bands > 0 {
		r.MeanPSNR = new(psnrSum / float64(bands))
	}
	r.MeanSAM = l.sam.Value() / n * 180 / math.Pi
	return r
}

// PSNR returns the peak signal-to-noise ratio in decibels of a signal whose
// peak value (for an image band, its dynamic range) is peak, distorted with
// mean square error mse:
//
//	PSNR = 10 log₁₀(peak² / mse),
//
// computed as 20 log₁₀(peak) − 10 log₁₀(mse) so that peak² cannot overflow.
// It is +Inf for mse = 0 and −Inf for peak = 0.
func PSNR(mse, peak float64) float64 {
	return 20*math.Log10(peak) - 10*math.Log10(mse)
}

// SpectralAngle returns the spectral angle between spectra a and b in radians,
// the angle between them as vectors in band space (Yuhas, Goetz & Boardman
// 1992, "Discrimination among semi-arid landscape endmembers using the
// Spectral Angle Mapper (SAM) algorithm", JPL Airborne Geoscience Workshop):
//
//	θ = arccos(⟨a, b⟩ / (‖a‖ ‖b‖)).
//
// It is insensitive to the brightness (scale) of either spectrum. It is
// computed in the equivalent form (Kahan)
//
//	θ = 2 atan2(‖â − b̂‖, ‖â + b̂‖),  â = a/‖a‖, b̂ = b/‖b‖,
//
// which needs no clamping of a rounded cosine into [−1, 1] and stays accurate
// near 0 and π, where arccos loses half the digits: with it two identical
// spectra have angle exactly 0 rather than about 1e-8. By definition here,
// the angle between two zero spectra is 0 and between a zero and a non-zero
// spectrum π/2.
//
// SpectralAngle panics if the lengths differ.
func SpectralAngle(a, b []float64) float64 {
	if len(a) != len(b) {
		panic("transform: SpectralAngle: length mismatch")
	}
	na, nb := floats.Norm(a, 2), floats.Norm(b, 2)
	switch {
	case na == 0 && nb == 0:
		return 0
	case na == 0 || nb == 0:
		return math.Pi / 2
	}
	var diff, sum float64
	for i, x := range a {
		u, v := x/na, b[i]/nb
		diff += (u - v) * (u - v)
		sum += (u + v) * (u + v)
	}
	return 2 * math.Atan2(math.Sqrt(diff), math.Sqrt(sum))
}

// Sum is a compensated sum (Neumaier's improvement of Kahan summation): the
// zero value is an empty sum.
type Sum struct{ s, c float64 }

// Add adds x.
func (a *Sum) Add(x float64) {
	t := a.s + x
	if math.Abs(a.s) >= math.Abs(x) {
		a.c += (a.s - t) + x
	} else {
		a.c += (x - t) + a.s
	}
	a.s = t
}

func (a *Sum) merge(b Sum) {
	a.Add(b.s)
	a.c += b.c
}

// Value returns the sum.
func (a Sum) Value() float64 { return a.s + a.c }
