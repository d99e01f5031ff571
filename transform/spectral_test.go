package transform

import (
	"slices"
	"strings"
	"testing"
)

// TestParseWavelengths: the expected values are the file's numbers times
// the unit factor (1 for nm, 1000 for um: the definition of the units).
func TestParseWavelengths(t *testing.T) {
	for _, tc := range []struct {
		name, in string
		want     []float64
		err      string
	}{
		{"nm header", "wavelength_nm\n400\n410.5\n", []float64{400, 410.5}, ""},
		{"um header", "# comment\nwavelength (um)\n0.4\n2.5\n", []float64{400, 2500}, ""},
		{"csv column", "band,wavelength (um),fwhm_um\n1,0.45,0.01\n2,0.55,0.01\n", []float64{450, 550}, ""},
		{"unit per value", "450 nm\n0.55um\n", []float64{450, 550}, ""},
		{"no unit", "450\n550\n", nil, "no unit"},
		{"not increasing", "nm\n550\n450\n", nil, "not increasing"},
		{"bad unit", "450 furlongs\n", nil, "unknown wavelength unit"},
		{"empty", "\n# only a comment\n", nil, "no wavelengths"},
		{"table without header", "1,450\n", nil, "header"},
		// Issue 24, item 12: a unit contradicting the values is refused,
		// not stored as 450 or 0.45 nm; a byte-order mark, CRLF and
		// lines longer than bufio.Scanner's 64 KiB are read.
		{"decimal comma under nm", "wavelength_nm\n450,5\n460,5\n", nil, `line 2: "450,5" has two values under a header of one column (a decimal comma? write 450.5)`},
		{"micrometres under nm", "wavelength_nm\n0.45\n0.55\n", nil, "line 2: 0.45 nm is below 100 nm: are the values in micrometres?"},
		{"micrometres after the value", "0.45 nm\n", nil, "0.45 nm is below 100 nm"},
		{"nanometres under um", "wavelength (um)\n450\n550\n", nil, "line 2: 450 um is above 100 um: are the values in nanometres?"},
		{"too few columns", "band,wavelength_nm\n1,450\n2\n", nil, "line 3: 1 columns under a header of 2"},
		{"byte-order mark and CRLF", "\ufeffwavelength_nm\r\n450\r\n550\r\n", []float64{450, 550}, ""},
		{"thermal", "wavelength_um\n10.9\n12\n", []float64{10900, 12000}, ""},
		{"long line", "wavelength_nm\n450" + strings.Repeat(" ", 70000) + "\n", []float64{450}, ""},
		{"long bad line", "wavelength_nm\n" + strings.Repeat("x", 70000) + "\n", nil, `line 2: "xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx..." is not a wavelength`},
	} {
		got, err := ParseWavelengths([]byte(tc.in))
		if tc.err != "" {
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("%s: error %v, want one containing %q", tc.name, err, tc.err)
			}
			continue
		}
		if err != nil || !slices.Equal(got, tc.want) {
			t.Errorf("%s: %v, %v, want %v", tc.name, got, err, tc.want)
		}
	}
}

func TestParseBandRanges(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want []int
		ok   bool
	}{
		{"104-106,3", []int{3, 104, 105, 106}, true},
		{"5, 5,4-5", []int{4, 5}, true},
		{"0", nil, false}, {"5-3", nil, false}, {"a-b", nil, false}, {"", nil, false}, {"1-", nil, false},
	} {
		got, err := ParseBandRanges(tc.in)
		if (err == nil) != tc.ok || !slices.Equal(got, tc.want) {
			t.Errorf("ParseBandRanges(%q) = %v, %v", tc.in, got, err)
		}
	}
}

func TestParseNMRanges(t *testing.T) {
	got, err := ParseNMRanges("1340-1450, 1790-1970")
	if err != nil || !slices.Equal(got, []NMRange{{1340, 1450}, {1790, 1970}}) {
		t.Errorf("got %v, %v", got, err)
	}
	for _, bad := range []string{"1450-1340", "1340", "-5-3", "nan-1", "1-inf", ""} {
		if _, err := ParseNMRanges(bad); err == nil {
			t.Errorf("ParseNMRanges(%q) accepted", bad)
		}
	}
}

func FuzzParseWavelengths(f *testing.F) {
	for _, s := range []string{"wavelength_nm\n400\n410\n", "band,wavelength (um),fwhm\n1,0.4,0.01\n", "450 nm\n0.5um\n", "", "nm\n1e308\n", "1,2\n"} {
		f.Add([]byte(s))
	}
	// Issue 24: a decimal comma, values contradicting the unit, a
	// byte-order mark, CRLF.
	for _, s := range []string{"wavelength_nm\n450,5\n", "wavelength_nm\n0.45\n", "wavelength (um)\n450\n", "\ufeffnm\r\n450\r\n"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		w, err := ParseWavelengths(data)
		if err != nil {
			// One short line in the user's words, whatever the input.
			if msg := err.Error(); strings.Contains(msg, "\n") || len(msg) > 300 || strings.Contains(msg, "strconv") || strings.Contains(msg, "bufio") {
				t.Fatalf("%q: error %q", data, msg)
			}
			return
		}
		if cerr := CheckWavelengths(w, len(w)); cerr != nil {
			t.Fatalf("accepted %q giving %v: %v", data, w, cerr)
		}
		for _, v := range w {
			if v < MinNM || v > MaxNM {
				t.Fatalf("accepted %q giving %v nm, outside [%d, %d]", data, v, MinNM, MaxNM)
			}
		}
	})
}

func FuzzParseBandRanges(f *testing.F) {
	for _, s := range []string{"104-113,150-170", "1", "3-1", ",", "1-1048577"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := ParseBandRanges(s)
		if err == nil && (len(got) == 0 || !slices.IsSorted(got) || got[0] < 1) {
			t.Fatalf("%q: %v", s, got)
		}
	})
}

func FuzzParseNMRanges(f *testing.F) {
	for _, s := range []string{"1340-1450,1790-1970", "1-2", "2-1", "nan-nan", "1e400-1e401"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := ParseNMRanges(s)
		if err != nil {
			return
		}
		for _, r := range got {
			if !(r.Lo > 0 && r.Hi >= r.Lo) || !finite(r.Hi) {
				t.Fatalf("%q: %v", s, r)
			}
		}
	})
}
