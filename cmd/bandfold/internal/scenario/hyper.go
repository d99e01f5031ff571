package scenario

import (
	"fmt"
	"math"
)

// HyperSize returns the size of the 30 m hyperspectral grid: the 10 m
// scene divided by HyperFactor, rounded up (the partial last row and
// column always fall in its collar).
func (c *Catchment) HyperSize() (width, height int) {
	return (c.w + HyperFactor - 1) / HyperFactor, (c.h + HyperFactor - 1) / HyperFactor
}

// HyperWavelengths returns the centres (nm) of the hyperspectral bands,
// evenly spaced from 400 to 2500 nm.
func (c *Catchment) HyperWavelengths() []float64 {
	return append([]float64(nil), c.spec.hyCentre[:]...)
}

// HyperBandNames returns names of the hyperspectral bands, e.g.
// "H001 (400.0 nm)".
func (c *Catchment) HyperBandNames() []string {
	out := make([]string, HyperBands)
	for b := range out {
		out[b] = fmt.Sprintf("H%03d (%.1f nm)", b+1, c.spec.hyCentre[b])
	}
	return out
}

// HyperNoData is the hyperspectral nodata value (-9999).
func (c *Catchment) HyperNoData() float64 { return HyperNoData }

// Hyperspectral renders the 30 m, 120-band cube for the window
// (x0, y0, w, h) of the hyperspectral grid into dst, pixel-major:
// dst[(row*w+col)*HyperBands+b]. It shows the catchment on date 1 (after
// the events): each pixel mixes the ground of its 3 x 3 block of 10 m
// pixels, with the residual atmospheric absorption (near-zero signal,
// stronger noise near 1400 and 1900 nm) of the invented sensor and a few
// bands of much higher noise (HyperNoisyBands). Values are surface
// reflectance x 10000, integral in [-9998, 32767], or HyperNoData (all
// bands) in the cube's own collar and outside the grid.
func (c *Catchment) Hyperspectral(x0, y0, w, h int, dst []float64) {
	c.hyperspectral(x0, y0, w, h, dst, true)
}

// HyperspectralClean renders the same window as Hyperspectral without the
// sensor noise: the signal the noisy cube was drawn from (the same mixture,
// illumination and absorption, neither noise nor rounding), with
// HyperNoData in the collar. For a seed, Hyperspectral minus
// HyperspectralClean is the noise, up to rounding and clamping.
func (c *Catchment) HyperspectralClean(x0, y0, w, h int, dst []float64) {
	c.hyperspectral(x0, y0, w, h, dst, false)
}

// HyperNoisyBands are the 0-based hyperspectral bands of the invented
// sensor with a faulty detector element: their noise is HyperNoisyFactor
// times that of their neighbours. They lie outside the absorption windows.
var HyperNoisyBands = []int{21, 47, 101}

// HyperNoisyFactor is the noise amplification of HyperNoisyBands.
const HyperNoisyFactor = 12

// HyperFWHM returns the full width at half maximum (nm) of every
// hyperspectral band.
func (c *Catchment) HyperFWHM() float64 { return hyperFWHM }

// hyperNoiseSigma returns the noise standard deviation of each
// hyperspectral band: the sensor's, raised in the faulty bands.
func (c *Catchment) hyperNoiseSigma() [HyperBands]float64 {
	var out [HyperBands]float64
	for b := range out {
		out[b] = float64(c.spec.hySigma[b])
	}
	for _, b := range HyperNoisyBands {
		out[b] *= HyperNoisyFactor
	}
	return out
}

func (c *Catchment) hyperspectral(x0, y0, w, h int, dst []float64, noisy bool) {
	checkWindow(w, h, HyperBands, len(dst))
	if w == 0 || h == 0 {
		return
	}
	const f = HyperFactor
	wn := c.ly.window(f*x0, f*y0, f*w, f*h)
	mask := make([]bool, w*h)
	c.hyColl.fill(x0, y0, w, h, mask)
	illum := c.hyIllum.fill(x0, y0, w, h)
	const rho = 0.1
	own, common := math.Sqrt(1-rho), math.Sqrt(rho)
	var weight [nEnd]float32
	var used []endmember
	var spec [HyperBands]float32
	sigma := c.hyperNoiseSigma()
	for j := range h {
		for i := range w {
			n := j*w + i
			out := dst[n*HyperBands : (n+1)*HyperBands]
			if mask[n] {
				for b := range out {
					out[b] = HyperNoData
				}
				continue
			}
			// Linear mixture of the endmembers of the 3 x 3 block.
			clear(weight[:])
			for dj := range f {
				for di := range f {
					p := c.ly.pixel(wn, f*i+di, f*j+dj, allEvents)
					weight[p.e1] += p.beta * (1 - p.m)
					weight[p.e2] += p.beta * p.m
				}
			}
			used = used[:0]
			for e, wt := range weight {
				if wt != 0 {
					used = append(used, endmember(e))
				}
			}
			scale := illum[n] / (f * f)
			clear(spec[:])
			for _, e := range used {
				wt, s := scale*weight[e], &c.spec.hy[e]
				for b := range spec {
					spec[b] += wt * s[b]
				}
			}
			if !noisy {
				for b := range out {
					out[b] = float64(spec[b])
				}
				continue
			}
			ph := pixelHash(c.hyNoise, x0+i, y0+j)
			shared := common * gauss(ph)
			for b := range out {
				v := float64(spec[b]) + sigma[b]*(own*gauss(bandHash(ph, b))+shared)
				out[b] = min(max(math.Round(v), HyperNoData+1), math.MaxInt16)
			}
		}
	}
}
