package jobkit

import (
	"fmt"
	"os"
	"slices"

	"bandfold/raster"
	"bandfold/transform"
)

// Spectral are the hyperspectral options of Learn: where the wavelengths
// come from and which bands to drop before fitting.
type Spectral struct {
	// WavelengthsFile holds one centre wavelength per band of the opened
	// stack (transform.ParseWavelengths); empty reads them from the band
	// metadata.
	WavelengthsFile string
	// Exclude are 1-based band numbers of the opened stack to drop;
	// ExcludeNM wavelength ranges whose bands are dropped (needs
	// wavelengths).
	Exclude   []int
	ExcludeNM []transform.NMRange
}

// selection is the outcome of applying Spectral to the scenes.
type selection struct {
	Scenes      []*raster.Stack // subsets of the opened scenes
	Numbers     []int           // 1-based numbers of the kept bands in the opened stack
	Wavelengths []float64       // nm, of the kept bands; nil when unknown
	Excluded    []transform.Excluded
}

// SelectBands reads the wavelengths and drops the excluded bands from every
// scene. The subsets share the scenes' files: close the scenes, not them.
func (sp Spectral) SelectBands(scenes []*raster.Stack) (*selection, error) {
	s0 := scenes[0]
	p := s0.Len()
	wl := s0.Wavelengths()
	if sp.WavelengthsFile != "" {
		data, err := os.ReadFile(sp.WavelengthsFile)
		if err != nil {
			return nil, Usagef("--wavelengths %s: %v", sp.WavelengthsFile, err)
		}
		if wl, err = transform.ParseWavelengths(data); err != nil {
			return nil, Usagef("--wavelengths %s: %v", sp.WavelengthsFile, err)
		}
		if len(wl) != p {
			return nil, Usagef("--wavelengths %s: %d wavelengths for the %d bands of %s", sp.WavelengthsFile, len(wl), p, Describe(s0))
		}
	} else if wl != nil {
		if err := transform.CheckWavelengths(wl, p); err != nil {
			return nil, fmt.Errorf("band wavelengths of %s: %w", Describe(s0), err)
		}
	}
	if len(sp.ExcludeNM) > 0 && wl == nil {
		return nil, Usagef("--exclude-nm: %s has no band wavelengths in its metadata; give them with --wavelengths FILE", Describe(s0))
	}
	sel := &selection{}
	var keep []int
	for j, b := range s0.Bands {
		reason := ""
		if slices.Contains(sp.Exclude, j+1) {
			reason = "--exclude"
		}
		for _, r := range sp.ExcludeNM {
			if reason == "" && r.Contains(wl[j]) {
				reason = fmt.Sprintf("--exclude-nm %g-%g", r.Lo, r.Hi)
			}
		}
		if reason != "" {
			e := transform.Excluded{Band: j + 1, Name: b.Name, Reason: reason}
			if wl != nil {
				e.WavelengthNM = wl[j]
			}
			sel.Excluded = append(sel.Excluded, e)
			continue
		}
		keep = append(keep, j)
		sel.Numbers = append(sel.Numbers, j+1)
		if wl != nil {
			sel.Wavelengths = append(sel.Wavelengths, wl[j])
		}
	}
	if n := len(sp.Exclude); n > 0 && sp.Exclude[n-1] > p {
		return nil, Usagef("--exclude %d: %s has only %d bands", sp.Exclude[n-1], Describe(s0), p)
	}
	if len(sel.Excluded) > 0 && len(keep) < 2 {
		return nil, Usagef("--exclude and --exclude-nm leave %d of the %d bands of %s: need at least 2", len(keep), p, Describe(s0))
	}
	for _, s := range scenes {
		if len(sel.Excluded) == 0 {
			sel.Scenes = append(sel.Scenes, s)
			continue
		}
		sub, err := s.Subset(keep)
		if err != nil {
			return nil, err
		}
		sel.Scenes = append(sel.Scenes, sub)
	}
	return sel, nil
}
