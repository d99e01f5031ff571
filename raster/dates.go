package raster

import (
	"errors"
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"github.com/airbusgeo/godal"
)

// Date is a scene's date and where it came from.
type Date struct {
	Time time.Time
	// Label is the date as people read it: 2016-07-01, or 2016 for a year.
	Label string
	// Source says where it came from: "--dates", a metadata key
	// ("MTL:DATE_ACQUIRED", "ACQUISITION_DATE", ...), "file name".
	Source string
}

// YYYYMMDD is the date as the integer YYYYMMDD.
func (d Date) YYYYMMDD() int {
	return d.Time.Year()*10000 + int(d.Time.Month())*100 + d.Time.Day()
}

// ErrNoDate marks a scene no source dates.
var ErrNoDate = errors.New("no date")

// DateSource is one piece of metadata that may give a scene's date.
type DateSource struct {
	// Key names the source: "MTL:DATE_ACQUIRED",
	// "IMAGERY:ACQUISITIONDATETIME", "ACQUISITION_DATE" or
	// "TIFFTAG_DATETIME".
	Key   string
	Value string
}

// DateMetadata returns the metadata of the raster at path that may date
// it, in order of preference: the acquisition date of the product (a STAC
// item's properties.datetime, the DATE_ACQUIRED of a Landsat *_MTL.txt
// beside it that lists the file,
// DATATAKE_SENSING_START of a Sentinel-2 Level-2A product's MTD_MSIL2A.xml
// above it, or of the product folder path names, ACQUISITIONDATETIME of the
// IMAGERY domain, ACQUISITION_DATE as bandfold's
// demo writes), then the TIFF DateTime tag, which TIFF 6.0 defines as the
// file's creation time and so comes last (after the file name, see
// SceneDate). Only the sources present are returned; a missing MTL file is
// not an error.
func DateMetadata(path string) ([]DateSource, error) {
	if IsSTAC(path) {
		it, err := ReadSTACItem(path)
		if err != nil || it.Datetime == "" {
			return nil, err
		}
		return []DateSource{{Key: STACDateSource, Value: it.Datetime}}, nil
	}
	if IsS2Product(path) {
		mtd := path
		if !strings.EqualFold(filepath.Base(path), S2MetadataName) {
			mtd = filepath.Join(path, S2MetadataName)
		}
		m, err := ReadS2Metadata(mtd)
		if err != nil {
			return nil, err
		}
		return []DateSource{{Key: "MTD_MSIL2A:DATATAKE_SENSING_START", Value: m.SensingStart}}, nil
	}
	ds, err := openDataset(path)
	if err != nil {
		return nil, err
	}
	defer ds.Close(errLogger)
	var out []DateSource
	add := func(key, value string) {
		if value != "" {
			out = append(out, DateSource{Key: key, Value: value})
		}
	}
	// Only a file named as a Landsat band file has an MTL looked for
	// beside it: a folder listing costs a request on a remote path.
	if landsatBandName.MatchString(filepath.Base(path)) {
		if m, err := findMTL(path, ReadMTL); err == nil {
			add("MTL:DATE_ACQUIRED", m.DateAcquired)
		}
	}
	if m, ok, err := FindS2Metadata(path, ReadS2Metadata); err == nil && ok {
		add("MTD_MSIL2A:DATATAKE_SENSING_START", m.SensingStart)
	}
	add("IMAGERY:ACQUISITIONDATETIME", ds.Metadata("ACQUISITIONDATETIME", godal.Domain("IMAGERY")))
	add("ACQUISITION_DATE", ds.Metadata("ACQUISITION_DATE"))
	add("TIFFTAG_DATETIME", ds.Metadata("TIFFTAG_DATETIME"))
	return out, nil
}

// SceneDate dates the scene whose first file is path: its acquisition
// metadata, else a date in its file name, else its TIFF DateTime tag (see
// DateMetadata). A STAC item is dated by its properties.datetime alone:
// its file name or URL is a catalogue's, not a date. disagree lists, for
// people, every other source that gives a different date
// ("TIFFTAG_DATETIME says 2019-01-10"). A scene no source dates gives an
// error wrapping ErrNoDate.
func SceneDate(path string) (d Date, disagree []string, err error) {
	if IsSTAC(path) {
		d, err := itemDate(path)
		return d, nil, err
	}
	srcs, err := DateMetadata(path)
	if err != nil {
		return Date{}, nil, err
	}
	var found []Date
	for _, s := range srcs {
		if v, ok := ParseDate(s.Value); ok {
			v.Source = s.Key
			found = append(found, v)
		}
	}
	if v, ok := DateFromName(path); ok {
		v.Source = "file name"
		// Before the file's creation time, after the acquisition metadata.
		at := len(found)
		if at > 0 && found[at-1].Source == "TIFFTAG_DATETIME" {
			at--
		}
		found = append(found[:at], append([]Date{v}, found[at:]...)...)
	}
	if len(found) == 0 {
		return Date{}, nil, fmt.Errorf("%s: %w in its metadata (a Landsat MTL's DATE_ACQUIRED, a Sentinel-2 MTD_MSIL2A.xml's DATATAKE_SENSING_START, ACQUISITIONDATETIME, ACQUISITION_DATE, TIFFTAG_DATETIME) or its name (YYYY-MM-DD, YYYYMMDD, YYYY)", path, ErrNoDate)
	}
	d = found[0]
	for _, o := range found[1:] {
		if !sameDay(d, o) {
			disagree = append(disagree, fmt.Sprintf("%s says %s", o.Source, o.Label))
		}
	}
	return d, disagree, nil
}

// sameDay reports whether two dates agree: the same day, or, where one is
// a year only, the same year.
func sameDay(a, b Date) bool {
	if len(a.Label) == 4 || len(b.Label) == 4 {
		return a.Time.Year() == b.Time.Year()
	}
	return a.Time.Equal(b.Time)
}

// ParseDate reads a date from a metadata value or a --dates item:
// YYYY-MM-DD, YYYY:MM:DD (the TIFF DateTime tag), YYYY/MM/DD or YYYYMMDD,
// each optionally followed by a time ("T10:20:30Z", " 10:20:30"), or a
// year YYYY from 1900 to 2199.
func ParseDate(s string) (Date, bool) {
	s = strings.TrimSpace(s)
	if i := strings.IndexAny(s, "T "); i >= 0 {
		s = s[:i]
	}
	for _, layout := range []string{"2006-01-02", "2006:01:02", "2006/01/02", "20060102"} {
		if len(s) == len(layout) {
			if t, err := time.Parse(layout, s); err == nil {
				return Date{Time: t, Label: t.Format("2006-01-02")}, true
			}
		}
	}
	if len(s) == 4 && allDigits(s) {
		t, err := time.Parse("2006", s)
		if err == nil && t.Year() >= 1900 && t.Year() <= 2199 {
			return Date{Time: t, Label: s}, true
		}
	}
	return Date{}, false
}

func allDigits(s string) bool {
	for _, c := range s {
		if c < '0' || c > '9' {
			return false
		}
	}
	return s != ""
}

// DateFromName finds a date in a file name: the first YYYY-MM-DD, else the
// first run of exactly 8 digits that is a valid YYYYMMDD, else the first
// run of exactly 4 digits that is a year from 1900 to 2199.
func DateFromName(path string) (Date, bool) {
	name := filepath.Base(path)
	for i := 0; i+10 <= len(name); i++ {
		if d, ok := ParseDate(name[i : i+10]); ok && name[i+4] == '-' && boundary(name, i, i+10) {
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
			if d, ok := ParseDate(r); ok {
				return d, true
			}
		}
	}
	return Date{}, false
}

// boundary reports whether name[i:j] is not part of a longer digit run.
func boundary(name string, i, j int) bool {
	digit := func(k int) bool { return k >= 0 && k < len(name) && name[k] >= '0' && name[k] <= '9' }
	return !digit(i-1) && !digit(j)
}
