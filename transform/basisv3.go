package transform

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
)

// Versions of the basis and partial files: version 1 holds the fit,
// version 2 adds the method, the noise covariance, wavelengths and the
// excluded bands, version 3 the source bands. This package writes
// LatestVersion and reads them all.
const (
	LatestVersion = 3
	oldestVersion = 1
)

// SourceBands records which bands of the stack the user gave a basis (or a
// partial) was fitted on, so that folding another image of the same kind
// takes the same bands without --bands (version 3).
type SourceBands struct {
	// Count is the number of bands of that stack: every band of its files,
	// in order, as --bands counts them.
	Count int `json:"count,omitempty"`
	// Numbers are the 1-based numbers there of the basis's bands, in the
	// basis's order: what --bands selected less what --exclude dropped.
	Numbers []int `json:"numbers,omitempty"`
	// Names, instead of Count and Numbers, are the names --bands chose the
	// basis's bands by ("B02", "B8A"), in the basis's order, less what
	// --exclude dropped.
	Names []string `json:"names,omitempty"`
}

// String describes s for people: "bands 2,4-6 of 6" (nil: "bands not
// recorded"; a Count of 0: "of a stack of unknown size").
func (s *SourceBands) String() string {
	switch {
	case s == nil:
		return "bands not recorded"
	case s.Names != nil:
		return "bands named " + strings.Join(s.Names, ",")
	}
	of := fmt.Sprintf("of %d", s.Count)
	if s.Count == 0 {
		of = "of a stack of unknown size"
	}
	return fmt.Sprintf("bands %s %s", FormatBandRanges(s.Numbers), of)
}

// FormatBandRanges writes band numbers as --bands reads them
// (ParseBandRanges), runs of consecutive numbers as ranges: "2,4-6".
func FormatBandRanges(ns []int) string {
	var parts []string
	for i := 0; i < len(ns); {
		j := i
		for j+1 < len(ns) && ns[j+1] == ns[j]+1 {
			j++
		}
		part := strconv.Itoa(ns[i])
		if j > i {
			part += "-" + strconv.Itoa(ns[j])
		}
		parts = append(parts, part)
		i = j + 1
	}
	return strings.Join(parts, ",")
}

// check checks s against the p bands of its basis or partial.
func (s *SourceBands) check(p int) error {
	if s.Names != nil {
		if len(s.Names) != p || s.Count != 0 || s.Numbers != nil || slices.Contains(s.Names, "") {
			return fmt.Errorf("source_bands: names must be %d band names, without count or numbers", p)
		}
		return nil
	}
	if len(s.Numbers) != p {
		return fmt.Errorf("source_bands has %d numbers for %d bands", len(s.Numbers), p)
	}
	if s.Count < p {
		return fmt.Errorf("source_bands: count %d is below the %d bands kept", s.Count, p)
	}
	seen := map[int]bool{}
	for _, n := range s.Numbers {
		if n < 1 || n > s.Count || seen[n] {
			return fmt.Errorf("source_bands: band number %d is not one of 1..%d once", n, s.Count)
		}
		seen[n] = true
	}
	return nil
}

// all reports whether s takes every band of its stack in order.
func (s *SourceBands) all() bool {
	if s.Names != nil {
		return false
	}
	for i, n := range s.Numbers {
		if n != i+1 {
			return false
		}
	}
	return len(s.Numbers) == s.Count
}

// Selection returns which bands of its source stack the basis kept, when it
// kept only some of them: from the source bands of a version 3 file; for an
// older file with excluded bands, from the bands' numbers in their file
// when they all come from one file (Count is then 0: unknown), else the
// numbers 1..p+len(Excluded) that were not excluded (Count p+len(Excluded):
// --bands could not be recorded, so it is taken as not given). ok is false
// when the basis kept every band of its stack or does not say.
func (b *Basis) Selection() (sel SourceBands, ok bool) {
	if b.SourceBands != nil {
		return *b.SourceBands, !b.SourceBands.all()
	}
	if len(b.Excluded) == 0 || b.Version >= 3 {
		return SourceBands{}, false
	}
	oneFile := !slices.ContainsFunc(b.Bands, func(bd Band) bool { return bd.Source != b.Bands[0].Source })
	if oneFile {
		for _, bd := range b.Bands {
			sel.Numbers = append(sel.Numbers, bd.Index)
		}
		return sel, true
	}
	dropped := map[int]bool{}
	for _, e := range b.Excluded {
		dropped[e.Band] = true
	}
	sel.Count = len(b.Bands) + len(b.Excluded)
	for n := 1; len(sel.Numbers) < len(b.Bands); n++ {
		if !dropped[n] {
			sel.Numbers = append(sel.Numbers, n)
		}
	}
	return sel, true
}
