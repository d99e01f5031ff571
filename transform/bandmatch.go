package transform

import "math"

// SpectralBand is what band matching knows of one band: a label for
// people and its spectral range in nanometres (Lo = Hi = the centre when
// only the centre is known; all zero when nothing is).
type SpectralBand struct {
	Label  string
	LoNM   float64
	HiNM   float64
	Centre float64
}

// Known reports whether the band's centre wavelength is known.
func (b SpectralBand) Known() bool { return b.Centre > 0 }

// pointTolerance is how close, relative to the centre, two bands known by
// their centres alone must be to count as one band: 1%.
const pointTolerance = 0.01

// contains reports whether wavelength w lies within b's range, widened by
// the point tolerance when b's range is a point.
func (b SpectralBand) contains(w float64) bool {
	lo, hi := b.LoNM, b.HiNM
	if hi-lo <= 0 {
		lo, hi = b.Centre*(1-pointTolerance), b.Centre*(1+pointTolerance)
	}
	return w >= lo && w <= hi
}

// Compatible reports whether two bands sample the same part of the
// spectrum: the centre of one lies within the other's range. Landsat 7's
// NIR (775-900 nm) and Landsat 8's (851-879 nm) are compatible; Landsat 7's
// blue (450-515 nm) and Landsat 8's coastal band (435-451 nm) are not. Bands
// of unknown wavelength are compatible with anything: nothing contradicts
// them.
func Compatible(a, b SpectralBand) bool {
	if !a.Known() || !b.Known() {
		return true
	}
	return a.contains(b.Centre) || b.contains(a.Centre)
}

// MatchShared pairs the bands of two dates by wavelength: for each band of
// ref in order, the compatible band of other with the nearest centre that
// no earlier band took. It returns the pairs as (ref index, other index),
// in ref's order. Bands of unknown wavelength are never paired here.
func MatchShared(ref, other []SpectralBand) [][2]int {
	taken := make([]bool, len(other))
	var out [][2]int
	for i, a := range ref {
		if !a.Known() {
			continue
		}
		best, dist := -1, math.Inf(1)
		for j, b := range other {
			if taken[j] || !b.Known() || !Compatible(a, b) {
				continue
			}
			if d := math.Abs(a.Centre - b.Centre); d < dist {
				best, dist = j, d
			}
		}
		if best >= 0 {
			taken[best] = true
			out = append(out, [2]int{i, best})
		}
	}
	return out
}
