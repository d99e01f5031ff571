package jobkit

import (
	"fmt"
	"slices"

	"bandfold/raster"
	"bandfold/transform"
)

// ForBasis is in with the basis's calibration (WithBasis) and, when the
// user chose no bands, the bands of the image arg that the basis, read from
// path, was fitted on (transform.Basis.Selection): those of the names it
// was chosen by, or by number:
//
//   - an image with as many bands as the stack the basis was fitted on (or,
//     for an older basis that does not say how many, with bands up to the
//     highest kept) gives the kept bands by their numbers there;
//   - an image with exactly as many bands as the basis kept is taken whole
//     when every band's name or centre wavelength is the basis's: a cube
//     already cut to the kept bands;
//   - any other image is refused, saying which bands the basis kept.
//
// A basis that kept every band of its stack leaves the bands to CheckBands,
// as before.
func (in Input) ForBasis(b *transform.Basis, path, arg string) (Input, error) {
	in, err := in.WithBasis(b, path)
	if err != nil || in.Bands != nil || in.BandNames != nil {
		return in, err
	}
	sel, ok := b.Selection()
	if !ok {
		return in, nil
	}
	if sel.Names != nil {
		in.BandNames = sel.Names
		return in, nil
	}
	n, err := raster.BandCount(SplitStack(arg))
	if err != nil {
		return in, err
	}
	switch p := len(b.Bands); {
	case sel.Count > 0 && n == sel.Count:
		in.Bands = sel.Numbers
	case n == p:
		return in, in.checkCut(b, path, arg, &sel)
	case sel.Count == 0 && slices.Max(sel.Numbers) <= n:
		in.Bands = sel.Numbers
	default:
		return in, fmt.Errorf("%s has %d bands, but the basis %s was fitted on %s: choose its bands with --bands",
			arg, n, path, describeSelection(&sel))
	}
	return in, nil
}

// describeSelection says which bands a basis kept: "bands 2,4-6 of a
// 6-band stack".
func describeSelection(sel *transform.SourceBands) string {
	if sel.Count == 0 {
		return "bands " + transform.FormatBandRanges(sel.Numbers) + " of its stack"
	}
	return fmt.Sprintf("bands %s of a %d-band stack", transform.FormatBandRanges(sel.Numbers), sel.Count)
}

// checkCut accepts image arg, which has exactly the p bands the basis kept,
// when each of its bands has the basis band's name or centre wavelength;
// a band that differs, or that carries neither to check, is refused.
func (in Input) checkCut(b *transform.Basis, path, arg string, sel *transform.SourceBands) error {
	s, err := OpenImage(arg, in.Options())
	if err != nil {
		return err
	}
	defer s.Close()
	for i, have := range s.Bands {
		want := b.Bands[i]
		switch cutBandMatch(have, want, basisWavelength(b, i)) {
		case bandDiffers:
			return fmt.Errorf("%s has as many bands as the basis %s kept (%s), but its band %d is %q where the basis has %q: choose its bands with --bands",
				Describe(s), path, describeSelection(sel), i+1, have.Name, want.Name)
		case bandUnknown:
			return fmt.Errorf("%s has as many bands as the basis %s kept (%s), but its band %d has no name or wavelength to check it by: give --bands 1-%d to take its bands in order, or the whole stack",
				Describe(s), path, describeSelection(sel), i+1, s.Len())
		}
	}
	return nil
}

// basisWavelength is the centre wavelength of band i of b in nm, 0 when
// unknown.
func basisWavelength(b *transform.Basis, i int) float64 {
	if i < len(b.WavelengthsNM) {
		return b.WavelengthsNM[i]
	}
	return 0
}

// Outcomes of cutBandMatch.
const (
	bandMatches = iota
	bandDiffers
	bandUnknown
)

// cutBandMatch compares an image band with a basis band of centre
// wavelength wantNM: by name where both carry a real one (not made up from
// the file name), else by centre wavelength where both are known, within
// the 1% transform.Compatible allows.
func cutBandMatch(have raster.Band, want transform.Band, wantNM float64) int {
	if !autoNamed(have.Name, have.Path, have.Index) && !autoNamed(want.Name, want.Source, want.Index) {
		if have.Name == want.Name {
			return bandMatches
		}
		return bandDiffers
	}
	if have.WavelengthNM > 0 && wantNM > 0 {
		a := transform.SpectralBand{Centre: have.WavelengthNM, LoNM: have.WavelengthNM, HiNM: have.WavelengthNM}
		w := transform.SpectralBand{Centre: wantNM, LoNM: wantNM, HiNM: wantNM}
		if transform.Compatible(a, w) {
			return bandMatches
		}
		return bandDiffers
	}
	return bandUnknown
}

// SourceOf records which bands of its stack a basis fitted on s keeps:
// numbers are the 1-based positions of the kept bands in s (what --exclude
// left), and in says how s was opened: by the band names or numbers of
// --bands, or whole.
func SourceOf(s *raster.Stack, in Input, numbers []int) (*transform.SourceBands, error) {
	if in.BandNames != nil {
		src := &transform.SourceBands{}
		for _, n := range numbers {
			name := s.Bands[n-1].Name
			if len(in.BandNames) == s.Len() {
				name = in.BandNames[n-1] // as typed, which selects it again
			}
			src.Names = append(src.Names, name)
		}
		return src, nil
	}
	count, err := raster.BandCount(s.Paths)
	if err != nil {
		return nil, err
	}
	src := &transform.SourceBands{Count: count}
	for _, n := range numbers {
		if in.Bands != nil {
			n = in.Bands[n-1]
		}
		src.Numbers = append(src.Numbers, n)
	}
	return src, nil
}
