package job

import (
	"testing"
	"time"
)

// TestSceneDates: each form of date in metadata values and file names
// (known by construction: the strings are written to carry these dates).
func TestSceneDates(t *testing.T) {
	values := []struct{ in, want string }{
		{"2016-07-01", "2016-07-01"},               // ACQUISITION_DATE, DATE_ACQUIRED, --dates
		{"2016:07:01 10:20:30", "2016-07-01"},      // TIFFTAG_DATETIME
		{"2016-07-01T10:20:30.000Z", "2016-07-01"}, // ACQUISITIONDATETIME (IMAGERY)
		{"20160701", "2016-07-01"},                 // --dates
		{"2016", "2016"},                           // a year
		{"2016-02-30", ""}, {"", ""}, {"soon", ""}, {"1850", ""},
	}
	for _, tc := range values {
		d, ok := parseDateValue(tc.in)
		if got := map[bool]string{true: d.label}[ok]; got != tc.want {
			t.Errorf("parseDateValue(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	names := []struct{ in, want string }{
		{"scenes/vessel-2023-06-14.tif", "2023-06-14"},
		{"LC08_L1TP_195025_20130707_20170503_01_T1_B4.TIF", "2013-07-07"},
		{"/data/mosaic_2019_summer.tif", "2019"},
		{"s1.tif", ""}, {"tile_123456789.tif", ""}, {"x-2023-13-01.tif", "2023"},
	}
	for _, tc := range names {
		d, ok := dateFromName(tc.in)
		if got := map[bool]string{true: d.label}[ok]; got != tc.want {
			t.Errorf("dateFromName(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
}

// FuzzDateParser: the parsers never panic, and a date they return reads
// back as itself.
func FuzzDateParser(f *testing.F) {
	for _, s := range []string{"2016-07-01", "2016:07:01 10:20:30", "20160701", "2016", "LC08_20130707_B1.TIF", "a-9999-99-99"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		for _, parse := range []func(string) (sceneDate, bool){parseDateValue, dateFromName} {
			d, ok := parse(s)
			if !ok {
				continue
			}
			back, ok := parseDateValue(d.label)
			if !ok || !back.t.Equal(d.t) || d.t.Location() != time.UTC {
				t.Fatalf("%q: date %v (%q) does not read back", s, d.t, d.label)
			}
		}
	})
}
