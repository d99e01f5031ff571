package scenario

import (
	"fmt"
	"math"
)

// Synth is a generic, deterministic benchmark cube: synthEndmembers latent
// spectra, smooth over the band axis, mixed by smooth abundance fields and
// a brightness field, plus a little per-band noise. Any band count and size
// work; values are mapped onto the range of Type:
//
//	"int16":   about -16000 .. 16000 (nominal reflectance 0..1)
//	"uint16":  about   2000 .. 62000
//	"float32": about      0 .. 1, rounded to float32 precision
//
// The cube has no nodata. Width and Height set the scale of the abundance
// patterns; windows reaching outside them are still rendered (the fields
// are defined everywhere).
type Synth struct {
	Bands, Width, Height int
	Type                 string // "int16", "uint16" or "float32"
	Seed                 uint64
}

const (
	synthEndmembers = 5
	synthNoise      = 0.004 // per-band noise, fraction of full scale
	synthShared     = 0.002 // noise common to all bands of a pixel
)

// Validate reports whether the description can be rendered.
func (s Synth) Validate() error {
	if s.Bands < 1 || s.Width < 1 || s.Height < 1 {
		return fmt.Errorf("scenario: synth needs positive bands and size, got %d bands %dx%d", s.Bands, s.Width, s.Height)
	}
	if _, _, err := synthRange(s.Type); err != nil {
		return err
	}
	return nil
}

// synthRange returns the affine map from nominal [0, 1] to the type.
func synthRange(typ string) (off, scale float64, err error) {
	switch typ {
	case "int16":
		return -16000, 32000, nil
	case "uint16":
		return 2000, 60000, nil
	case "float32":
		return 0, 1, nil
	}
	return 0, 0, fmt.Errorf("scenario: synth type %q is not int16, uint16 or float32", typ)
}

// spectra returns the latent endmember spectra, synthEndmembers x Bands,
// each a slope plus three Gaussian bumps over the band axis, in [0.02, 0.98].
func (s Synth) spectra() [][]float64 {
	out := make([][]float64, synthEndmembers)
	for k := range out {
		kk := subKey(s.Seed, uint64(k)+1000)
		base := 0.1 + 0.4*unit(hash2(kk, 0, 0))
		slope := 0.5 * (unit(hash2(kk, 0, 1)) - 0.5)
		sp := make([]float64, s.Bands)
		for b := range sp {
			t := 0.5
			if s.Bands > 1 {
				t = float64(b) / float64(s.Bands-1)
			}
			v := base + slope*t
			for m := int64(1); m <= 3; m++ {
				c := unit(hash2(kk, m, 0))
				wd := 0.05 + 0.25*unit(hash2(kk, m, 1))
				a := 0.5 * (unit(hash2(kk, m, 2)) - 0.4)
				v += a * math.Exp(-((t-c)/wd)*((t-c)/wd))
			}
			sp[b] = min(max(v, 0.02), 0.98)
		}
		out[k] = sp
	}
	return out
}

// Render writes the window (x0, y0, w, h) into dst, pixel-major:
// dst[(row*w+col)*Bands+b]. It panics if the description is invalid or dst
// is too short.
func (s Synth) Render(x0, y0, w, h int, dst []float64) {
	if err := s.Validate(); err != nil {
		panic(err)
	}
	checkWindow(w, h, s.Bands, len(dst))
	if w == 0 || h == 0 {
		return
	}
	off, scale, _ := synthRange(s.Type)
	lo, hi := synthLimits(s.Type)
	em := s.spectra()
	// Band-major copy of the endmembers for the inner loop.
	emT := make([]float64, s.Bands*synthEndmembers)
	for k, sp := range em {
		for b, v := range sp {
			emT[b*synthEndmembers+k] = v
		}
	}
	cell := max(16, float64(min(s.Width, s.Height))/5)
	var abund [synthEndmembers][]float32
	for k := range abund {
		abund[k] = fillNew(newField(subKey(s.Seed, uint64(k)+2000), cell, 4), x0, y0, w, h)
	}
	bright := fillNew(newField(subKey(s.Seed, 3000), 24, 2), x0, y0, w, h)
	noiseKey := subKey(s.Seed, 4000)
	var a [synthEndmembers]float64
	for n := range w * h {
		sum := 0.0
		for k := range a {
			a[k] = math.Exp(4 * float64(abund[k][n]))
			sum += a[k]
		}
		beta := (1 + 0.1*float64(bright[n])) / sum
		for k := range a {
			a[k] *= beta
		}
		ph := pixelHash(noiseKey, x0+n%w, y0+n/w)
		shared := synthShared * gauss(ph)
		out := dst[n*s.Bands : (n+1)*s.Bands]
		for b := range out {
			e := emT[b*synthEndmembers : (b+1)*synthEndmembers]
			// Unrolled for synthEndmembers == 5 (a is an array, so a smaller
			// constant fails to compile).
			v := a[0]*e[0] + a[1]*e[1] + a[2]*e[2] + a[3]*e[3] + a[4]*e[4]
			v += shared + synthNoise*gauss(bandHash(ph, b))
			out[b] = min(max(off+scale*v, lo), hi)
		}
		if s.Type == "float32" {
			for b := range out {
				out[b] = float64(float32(out[b]))
			}
		} else {
			for b := range out {
				out[b] = math.Round(out[b])
			}
		}
	}
}

// synthLimits are the clamp limits of each type.
func synthLimits(typ string) (lo, hi float64) {
	switch typ {
	case "int16":
		return math.MinInt16, math.MaxInt16
	case "uint16":
		return 0, math.MaxUint16
	}
	return -math.MaxFloat32, math.MaxFloat32
}
