package job

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
	scenes      []*raster.Stack // subsets of the opened scenes
	numbers     []int           // 1-based numbers of the kept bands in the opened stack
	wavelengths []float64       // nm, of the kept bands; nil when unknown
	excluded    []transform.Excluded
}

// selectBands reads the wavelengths and drops the excluded bands from every
// scene. The subsets share the scenes' files: close the scenes, not them.
func (sp Spectral) selectBands(scenes []*raster.Stack) (*selection, error) {
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
			return nil, Usagef("--wavelengths %s: %d wavelengths for the %d bands of %s", sp.WavelengthsFile, len(wl), p, describe(s0))
		}
	} else if wl != nil {
		if err := transform.CheckWavelengths(wl, p); err != nil {
			return nil, fmt.Errorf("band wavelengths of %s: %w", describe(s0), err)
		}
	}
	if len(sp.ExcludeNM) > 0 && wl == nil {
		return nil, Usagef("--exclude-nm: %s has no band wavelengths in its metadata; give them with --wavelengths FILE", describe(s0))
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
			sel.excluded = append(sel.excluded, e)
			continue
		}
		keep = append(keep, j)
		sel.numbers = append(sel.numbers, j+1)
		if wl != nil {
			sel.wavelengths = append(sel.wavelengths, wl[j])
		}
	}
	if n := len(sp.Exclude); n > 0 && sp.Exclude[n-1] > p {
		return nil, Usagef("--exclude %d: %s has only %d bands", sp.Exclude[n-1], describe(s0), p)
	}
	if len(sel.excluded) > 0 && len(keep) < 2 {
		return nil, Usagef("--exclude and --exclude-nm leave %d of the %d bands of %s: need at least 2", len(keep), p, describe(s0))
	}
	for _, s := range scenes {
		if len(sel.excluded) == 0 {
			sel.scenes = append(sel.scenes, s)
			continue
		}
		sub, err := s.Subset(keep)
		if err != nil {
			return nil, err
		}
		sel.scenes = append(sel.scenes, sub)
	}
	return sel, nil
}
