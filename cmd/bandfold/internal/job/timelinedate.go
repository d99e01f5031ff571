package job

import (
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"bandfold/raster"
)

// sceneDate is a scene's date and where it came from.
type sceneDate struct {
	t      time.Time
	label  string // as people read it: 2016-07-01, or 2016 for a year
	source string // "--dates", a metadata key, or "file name"
}

// yyyymmdd is the date as the integer YYYYMMDD.
func (d sceneDate) yyyymmdd() int {
	return d.t.Year()*10000 + int(d.t.Month())*100 + d.t.Day()
}

// parseDateValue reads a date from a metadata value or a --dates item:
// YYYY-MM-DD, YYYY:MM:DD (the TIFF DateTime tag), YYYY/MM/DD or YYYYMMDD,
// each optionally followed by a time ("T10:20:30Z", " 10:20:30"), or a
// year YYYY.
func parseDateValue(s string) (sceneDate, bool) {
	s = strings.TrimSpace(s)
	if i := strings.IndexAny(s, "T "); i >= 0 {
		s = s[:i]
	}
	for _, layout := range []string{"2006-01-02", "2006:01:02", "2006/01/02", "20060102"} {
		if len(s) == len(layout) {
			if t, err := time.Parse(layout, s); err == nil {
				return sceneDate{t: t, label: t.Format("2006-01-02")}, true
			}
		}
	}
	if len(s) == 4 && allDigits(s) {
		return yearDate(s)
	}
	return sceneDate{}, false
}

func yearDate(s string) (sceneDate, bool) {
	t, err := time.Parse("2006", s)
	if err != nil || t.Year() < 1900 || t.Year() > 2199 {
		return sceneDate{}, false
	}
	return sceneDate{t: t, label: s}, true
}

func allDigits(s string) bool {
	for _, c := range s {
		if c < '0' || c > '9' {
			return false
		}
	}
	return s != ""
}

// dateFromName finds a date in a file name: the first YYYY-MM-DD, else the
// first run of exactly 8 digits that is a valid YYYYMMDD, else the first
// run of exactly 4 digits that is a year from 1900 to 2199.
func dateFromName(path string) (sceneDate, bool) {
	name := filepath.Base(path)
	for i := 0; i+10 <= len(name); i++ {
		if d, ok := parseDateValue(name[i : i+10]); ok && name[i+4] == '-' && boundary(name, i, i+10) {
			return d, true
		}
	}
	var runs []string
	for i := 0; i < len(name); {
		j := i
		for j < len(name) && name[j] >= '0' && name[j] <= '9' {
			j++
		}
		if j > i {
			runs = append(runs, name[i:j])
			i = j
		} else {
			i++
		}
	}
	for _, want := range []int{8, 4} {
		for _, r := range runs {
			if len(r) != want {
				continue
			}
			if d, ok := parseDateValue(r); ok {
				return d, true
			}
		}
	}
	return sceneDate{}, false
}

// boundary reports whether name[i:j] is not part of a longer digit run.
func boundary(name string, i, j int) bool {
	digit := func(k int) bool { return k >= 0 && k < len(name) && name[k] >= '0' && name[k] <= '9' }
	return !digit(i-1) && !digit(j)
}

// dateOf dates a scene: the given --dates item, else its first file's
// metadata (raster.DateMetadata, in that order), else its file name.
func dateOf(arg, given string) (sceneDate, error) {
	if given != "" {
		d, ok := parseDateValue(given)
		if !ok {
			return d, Usagef("--dates: %q (for %s) is not a date: want YYYY-MM-DD, YYYYMMDD or YYYY", given, arg)
		}
		d.source = "--dates"
		return d, nil
	}
	first := SplitStack(arg)[0]
	srcs, err := raster.DateMetadata(first)
	if err != nil {
		return sceneDate{}, err
	}
	for _, s := range srcs {
		if d, ok := parseDateValue(s.Value); ok {
			d.source = s.Key
			return d, nil
		}
	}
	if d, ok := dateFromName(first); ok {
		d.source = "file name"
		return d, nil
	}
	return sceneDate{}, fmt.Errorf("%s has no date: none in its metadata (TIFFTAG_DATETIME, ACQUISITIONDATETIME, ACQUISITION_DATE, a Landsat MTL's DATE_ACQUIRED) or its name (YYYY-MM-DD, YYYYMMDD, YYYY); give the dates with --dates", arg)
}
