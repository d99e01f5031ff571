package raster

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
)

func TestParseBands(t *testing.T) {
	tests := []struct {
		spec string
		want []int
		err  string
	}{
		{"", nil, ""},
		{"3", []int{3}, ""},
		{"1-5,7", []int{1, 2, 3, 4, 5, 7}, ""},
		{" 7 , 2-3 ", []int{7, 2, 3}, ""},
		{"4-4", []int{4}, ""},
		{"0", nil, `bands "0": band 0 out of range (bands count from 1)`},
		{"5-3", nil, `bands "5-3": range 5-3 runs backwards`},
		{"1,1", nil, `bands "1,1": band 1 selected twice`},
		{"1-3,2", nil, `bands "1-3,2": band 2 selected twice`},
		{"a", nil, `bands "a": "a" is not a band number`},
		{"1,", nil, `bands "1,": an empty item between commas`},
		{"-2", nil, `bands "-2": -2 is not a band number (bands count from 1)`},
		{"1-2-3", nil, `bands "1-2-3": "2-3" is not a band number`},
		{"1-999999999", nil, `bands "1-999999999": band 999999999 out of range (bands count from 1)`},
	}
	for _, tc := range tests {
		got, err := ParseBands(tc.spec)
		if tc.err != "" {
			if err == nil || err.Error() != tc.err || !errors.Is(err, ErrBadSpec) {
				t.Errorf("ParseBands(%q) error = %v, want %s", tc.spec, err, tc.err)
			}
			continue
		}
		if err != nil || !slices.Equal(got, tc.want) {
			t.Errorf("ParseBands(%q) = %v, %v; want %v", tc.spec, got, err, tc.want)
		}
	}
}

func FuzzParseBands(f *testing.F) {
	for _, s := range []string{"1-5,7", "3", "", "2-1", "1,,2", "99999-100000"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, spec string) {
		got, err := ParseBands(spec)
		if err != nil {
			return
		}
		seen := map[int]bool{}
		for _, b := range got {
			if b < 1 || b > maxBandNumber || seen[b] {
				t.Fatalf("ParseBands(%q) gave bad or repeated band %d", spec, b)
			}
			seen[b] = true
		}
	})
}

func TestParseNoData(t *testing.T) {
	got, err := ParseNoData("0, -9999,nan")
	if err != nil || len(got) != 3 || got[0] != 0 || got[1] != -9999 || !math.IsNaN(got[2]) {
		t.Fatalf("got %v, %v", got, err)
	}
	for _, bad := range []string{"x", "1,,2", "inf"} {
		if _, err := ParseNoData(bad); !errors.Is(err, ErrBadSpec) {
			t.Errorf("ParseNoData(%q) = %v, want ErrBadSpec", bad, err)
		}
	}
}

func TestParseNoDataNaN(t *testing.T) {
	// Known by construction: every spelling of NaN gives NaN, in lists too.
	for _, spec := range []string{"nan", "NaN", "NAN", "-nan", "+NaN"} {
		got, err := ParseNoData(spec)
		if err != nil || len(got) != 1 || !math.IsNaN(got[0]) {
			t.Errorf("ParseNoData(%q) = %v, %v; want [NaN]", spec, got, err)
		}
	}
	got, err := ParseNoData("NaN, 0 ,nan")
	if err != nil || len(got) != 3 || !math.IsNaN(got[0]) || got[1] != 0 || !math.IsNaN(got[2]) {
		t.Errorf("ParseNoData(\"NaN, 0 ,nan\") = %v, %v", got, err)
	}
	for _, bad := range []string{"nann", "--nan", "+-nan", "-inf", "Infinity", "1e999"} {
		if _, err := ParseNoData(bad); !errors.Is(err, ErrBadSpec) {
			t.Errorf("ParseNoData(%q) = %v, want ErrBadSpec", bad, err)
		}
	}
}

func FuzzParseNoData(f *testing.F) {
	for _, s := range []string{"0", "-9999,nan", "NaN", " 1 , 2 ", "inf", "1,,2", "-nan,+NaN", "0x1p-2"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, spec string) {
		got, err := ParseNoData(spec)
		if err != nil {
			if !errors.Is(err, ErrBadSpec) {
				t.Fatalf("ParseNoData(%q) error %v does not wrap ErrBadSpec", spec, err)
			}
			return
		}
		if strings.TrimSpace(spec) == "" {
			if got != nil {
				t.Fatalf("ParseNoData(%q) = %v, want nil", spec, got)
			}
			return
		}
		if len(got) != strings.Count(spec, ",")+1 {
			t.Fatalf("ParseNoData(%q) gave %d values for %d parts", spec, len(got), strings.Count(spec, ",")+1)
		}
		for _, v := range got {
			if math.IsInf(v, 0) {
				t.Fatalf("ParseNoData(%q) gave an infinity", spec)
			}
		}
	})
}

func TestParseResampling(t *testing.T) {
	for in, want := range map[string]string{"nearest": "nearest", "near": "nearest", " Average ": "average",
		"bilinear": "bilinear", "cubic": "cubic", "cubicspline": "cubicspline", "lanczos": "lanczos", "MODE": "mode"} {
		if got, err := ParseResampling(in); err != nil || got != want {
			t.Errorf("ParseResampling(%q) = %q, %v; want %q", in, got, err, want)
		}
	}
	for _, bad := range []string{"", "wobbly", "max", "rms"} {
		if _, err := ParseResampling(bad); !errors.Is(err, ErrBadSpec) || !strings.Contains(err.Error(), "nearest, bilinear") {
			t.Errorf("ParseResampling(%q) = %v, want ErrBadSpec listing the names", bad, err)
		}
	}
}

func TestParseCalibration(t *testing.T) {
	for in, want := range map[string]string{"scale": CalibrateScale, "TOA": CalibrateTOA, " toa ": CalibrateTOA} {
		if got, err := ParseCalibration(in); err != nil || got != want {
			t.Errorf("ParseCalibration(%q) = %q, %v; want %q", in, got, err, want)
		}
	}
	if _, err := ParseCalibration("radiance"); !errors.Is(err, ErrBadSpec) {
		t.Errorf("ParseCalibration(radiance) = %v, want ErrBadSpec", err)
	}
}
