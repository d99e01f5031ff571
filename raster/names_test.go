package raster

import (
	"fmt"
	"os/exec"
	"path/filepath"
	"slices"
	"testing"

	"bandfold/tiles/testenv"
)

// landsatSubset is the Landsat 7 ETM+ subset shipped in r-cran-stars as
// tif/L7_ETMs.tif (bands 1-5 and 7), fetched by scripts/testdata.sh.
const landsatSubset = "../testdata/external/L7_ETMs.tif"

func TestStemParts(t *testing.T) {
	const c1 = "LC08_L1TP_195025_20130707_20170503_01_T1"
	var l8, l8Bands []string
	for n := 1; n <= 7; n++ {
		l8 = append(l8, fmt.Sprintf("%s_B%d", c1, n))
		l8Bands = append(l8Bands, fmt.Sprintf("B%d", n))
	}
	// Expected parts and common names are known by construction: the
	// words that differ, and the words shared, joined at a separator.
	tests := []struct {
		name   string
		stems  []string
		common string
		parts  []string // nil: no pattern
	}{
		{"Landsat bands", l8, c1, l8Bands},
		{"two-digit band", []string{c1 + "_B9", c1 + "_B10", c1 + "_B11"}, c1, []string{"B9", "B10", "B11"}},
		{"with a quality band", []string{c1 + "_B1", c1 + "_QA_PIXEL"}, c1, []string{"B1", "QA_PIXEL"}},
		{"shared tail", []string{"scene_red_v2", "scene_nir_v2"}, "scene_v2", []string{"red", "nir"}},
		{"dashes and dots", []string{"site-2020.red", "site-2020.nir"}, "site-2020", []string{"red", "nir"}},
		{"separator at the joint differs", []string{"ab_1", "ab-2"}, "ab", []string{"1", "2"}},
		{"word shared at the start only", []string{"T1_B1x", "T1_B2x"}, "T1", []string{"B1x", "B2x"}},
		{"nothing shared", []string{"red", "nir"}, "", []string{"red", "nir"}},
		{"one stem inside another", []string{"scene", "scene_B2"}, "", []string{"scene", "scene_B2"}},
		{"tail overlapping head", []string{"a_b", "a_b_b"}, "a", []string{"b", "b_b"}},
		{"same stems", []string{"x", "x"}, "", nil},
		{"one stem", []string{c1 + "_B1"}, "", nil},
	}
	for _, tc := range tests {
		common, parts, ok := stemParts(tc.stems)
		if ok != (tc.parts != nil) || (ok && (common != tc.common || !slices.Equal(parts, tc.parts))) {
			t.Errorf("%s: stemParts(%q) = %q, %q, %v; want %q, %q", tc.name, tc.stems, common, parts, ok, tc.common, tc.parts)
		}
	}
}

func TestBandRange(t *testing.T) {
	// Known by construction: runs counting up by one collapse.
	tests := []struct {
		names []string
		want  string
	}{
		{[]string{"B1", "B2", "B3", "B4", "B5", "B6", "B7"}, "B1-B7"},
		{[]string{"B1", "B2", "B3", "B4", "B5", "B7"}, "B1-B5,B7"},
		{[]string{"B9", "B10", "B11"}, "B9-B11"},
		{[]string{"B08", "B09", "B10", "B8A"}, "B08-B10,B8A"},
		{[]string{"B1", "B01"}, "B1,B01"},
		{[]string{"B3", "B2", "B1"}, "B3,B2,B1"},
		{[]string{"red", "nir"}, "red,nir"},
		{[]string{"B1", "QA_PIXEL"}, "B1,QA_PIXEL"},
		{[]string{"B2"}, "B2"},
	}
	for _, tc := range tests {
		if got := bandRange(tc.names); got != tc.want {
			t.Errorf("bandRange(%q) = %q, want %q", tc.names, got, tc.want)
		}
	}
}

// TestLabelAndNames checks the names and labels Open gives on constructed
// files: by construction of their names and descriptions.
func TestLabelAndNames(t *testing.T) {
	dir := t.TempDir()
	one := defaultRaster()
	one.bands = 1
	const c1 = "LC08_L1TP_195025_20130707_20170503_01_T1"
	var paths []string
	for n := 1; n <= 7; n++ {
		r := one
		if n == 3 {
			r.descs = []string{"green"}
		}
		paths = append(paths, r.write(t, filepath.Join(dir, fmt.Sprintf("%s_B%d.TIF", c1, n))))
	}
	multi := defaultRaster().write(t, filepath.Join(dir, "multi.tif"))
	tests := []struct {
		name  string
		paths []string
		opts  []Option
		label string
		names []string
	}{
		{"Landsat bands", paths, nil, c1 + " [B1-B7]", []string{"B1", "B2", "green", "B4", "B5", "B6", "B7"}},
		{"selected bands", paths, []Option{SelectBands([]int{5, 1, 2})}, c1 + " [B5,B1-B2]", []string{"B5", "B1", "B2"}},
		{"one file", paths[:1], nil, c1 + "_B1", []string{c1 + "_B1:1"}},
		{"multiband files", []string{multi, paths[0]}, nil, "multi," + c1 + "_B1", []string{"multi:1", "multi:2", "multi:3", c1 + "_B1:1"}},
	}
	for _, tc := range tests {
		s, err := Open(tc.paths, tc.opts...)
		if err != nil {
			t.Fatal(err)
		}
		var names []string
		for _, b := range s.Bands {
			names = append(names, b.Name)
		}
		if s.Label != tc.label || !slices.Equal(names, tc.names) {
			t.Errorf("%s: label %q, names %q; want %q, %q", tc.name, s.Label, names, tc.label, tc.names)
		}
		if tc.name == "Landsat bands" {
			sub, err := s.Subset([]int{3, 4})
			if err != nil {
				t.Fatal(err)
			}
			if want := c1 + " [B4-B5]"; sub.Label != want {
				t.Errorf("subset label %q, want %q", sub.Label, want)
			}
		}
		s.Close()
	}
}

// TestLandsatSingleBandFiles splits the Landsat 7 subset into one file per
// band with GDAL's own gdal_translate -b and opens them as one stack: the
// bands are named after the differing part of the file names, and the
// pixels equal those of the 6-band original (gdal_translate copies them).
func TestLandsatSingleBandFiles(t *testing.T) {
	testenv.NeedFile(t, landsatSubset, "run bash scripts/testdata.sh")
	testenv.NeedTool(t, "gdal_translate", "gdal-bin")
	dir := t.TempDir()
	bands := []int{1, 2, 3, 4, 5, 7} // the ETM+ bands of the subset's six
	var paths, want []string
	for i, n := range bands {
		p := filepath.Join(dir, fmt.Sprintf("L7_ETMs_B%d.tif", n))
		if out, err := exec.Command("gdal_translate", "-q", "-b", fmt.Sprint(i+1), landsatSubset, p).CombinedOutput(); err != nil {
			t.Fatalf("gdal_translate: %v: %s", err, out)
		}
		paths = append(paths, p)
		want = append(want, fmt.Sprintf("B%d", n))
	}
	s, err := Open(paths)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	var names []string
	for _, b := range s.Bands {
		names = append(names, b.Name)
	}
	if !slices.Equal(names, want) || s.Label != "L7_ETMs [B1-B5,B7]" {
		t.Errorf("names %q, label %q; want %q, %q", names, s.Label, want, "L7_ETMs [B1-B5,B7]")
	}
	orig, err := Open([]string{landsatSubset})
	if err != nil {
		t.Fatal(err)
	}
	if orig.Label != "L7_ETMs" {
		t.Errorf("label of the original %q, want L7_ETMs", orig.Label)
	}
	got, gotValid, n := readAll(t, s)
	ref, refValid, m := readAll(t, orig)
	if n != m || !slices.Equal(got, ref) || !slices.Equal(gotValid, refValid) {
		t.Errorf("the split stack reads differently from the original (%d and %d valid pixels)", n, m)
	}
}
