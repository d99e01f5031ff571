package raster

import (
	"errors"
	"math"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"
)

func TestParseMask(t *testing.T) {
	// Expected rules are known by construction from the specification.
	tests := []struct {
		spec string
		want MaskRule
		err  string
	}{
		{"qa.tif", MaskRule{Path: "qa.tif"}, ""},
		{" qa.tif ", MaskRule{Path: "qa.tif"}, ""},
		{"qa.tif:bits=0-4,9", MaskRule{Path: "qa.tif", Bits: []int{0, 1, 2, 3, 4, 9}}, ""},
		{"qa.tif:bits=9, 3 ,3-4", MaskRule{Path: "qa.tif", Bits: []int{3, 4, 9}}, ""},
		{"qa.tif:bits=15", MaskRule{Path: "qa.tif", Bits: []int{15}}, ""},
		{"qa.tif:bits=0-63", MaskRule{Path: "qa.tif", Bits: bitList(math.MaxUint64)}, ""},
		{"scl.tif:values=0,3,8-10", MaskRule{Path: "scl.tif", Values: []ValueRange{{0, 0}, {3, 3}, {8, 10}}}, ""},
		{"m.tif:values=-5--3,-1,1e-3-2,0.5", MaskRule{Path: "m.tif", Values: []ValueRange{{-5, -3}, {-1, -1}, {1e-3, 2}, {0.5, 0.5}}}, ""},
		{`C:\data\qa.tif:bits=1`, MaskRule{Path: `C:\data\qa.tif`, Bits: []int{1}}, ""},
		{"/vsizip/a.zip/qa.tif", MaskRule{Path: "/vsizip/a.zip/qa.tif"}, ""},
		{"a:values=1:bits=2", MaskRule{Path: "a:values=1", Bits: []int{2}}, ""},
		{"a:bits=1:values=2", MaskRule{Path: "a:bits=1", Values: []ValueRange{{2, 2}}}, ""},
		{"qa.tif:bits=64", MaskRule{}, `mask "qa.tif:bits=64": bit 64 out of range (bits count from 0, the least significant, to 63)`},
		{"qa.tif:bits=-1", MaskRule{}, `mask "qa.tif:bits=-1": "" is not a bit number`},
		{"qa.tif:bits=4-2", MaskRule{}, `mask "qa.tif:bits=4-2": bit range 4-2 runs backwards`},
		{"qa.tif:bits=", MaskRule{}, `mask "qa.tif:bits=": empty bit list`},
		{"qa.tif:bits=1,,2", MaskRule{}, `mask "qa.tif:bits=1,,2": "" is not a bit number`},
		{"qa.tif:values=", MaskRule{}, `mask "qa.tif:values=": empty value list`},
		{"qa.tif:values=cloud", MaskRule{}, `mask "qa.tif:values=cloud": "cloud" is not a number or a range of numbers`},
		{"qa.tif:values=nan", MaskRule{}, `mask "qa.tif:values=nan": "nan" is not a number or a range of numbers`},
		{"qa.tif:values=10-8", MaskRule{}, `mask "qa.tif:values=10-8": value range 10-8 runs backwards`},
		{":bits=1", MaskRule{}, `mask ":bits=1": no file`},
		{"", MaskRule{}, `mask "": no file`},
	}
	for _, tc := range tests {
		got, err := ParseMask(tc.spec)
		if tc.err != "" {
			if err == nil || err.Error() != tc.err || !errors.Is(err, ErrBadSpec) {
				t.Errorf("ParseMask(%q) error = %v, want %s", tc.spec, err, tc.err)
			}
			continue
		}
		if err != nil || !reflect.DeepEqual(got, tc.want) {
			t.Errorf("ParseMask(%q) = %+v, %v; want %+v", tc.spec, got, err, tc.want)
		}
	}
	// String writes the rule back compactly.
	r, _ := ParseMask("qa.tif:bits=9,0-4,11")
	if got := r.String(); got != "qa.tif:bits=0-4,9,11" {
		t.Errorf("String() = %q", got)
	}
}

func FuzzParseMask(f *testing.F) {
	for _, s := range []string{"qa.tif", "qa.tif:bits=0-4,9", "scl.tif:values=0,3,8-10", "/vsizip/a.zip/b:c.tif:bits=63",
		"m:values=-5--3,1e-3-2", "a:bits=1:values=2", ":bits=", "x:bits=64", "x:values=1-"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, spec string) {
		r, err := ParseMask(spec)
		if err != nil {
			if !errors.Is(err, ErrBadSpec) {
				t.Fatalf("ParseMask(%q) error %v does not wrap ErrBadSpec", spec, err)
			}
			return
		}
		if strings.TrimSpace(r.Path) == "" || (r.Bits != nil && r.Values != nil) {
			t.Fatalf("ParseMask(%q) = %+v", spec, r)
		}
		for i, b := range r.Bits {
			if b < 0 || b > 63 || (i > 0 && b <= r.Bits[i-1]) {
				t.Fatalf("ParseMask(%q) bits %v", spec, r.Bits)
			}
		}
		for _, v := range r.Values {
			if !(v.Lo <= v.Hi) || math.IsInf(v.Lo, 0) || math.IsInf(v.Hi, 0) {
				t.Fatalf("ParseMask(%q) values %v", spec, r.Values)
			}
		}
		// The rule written back reads as the same rule.
		again, err := ParseMask(r.String())
		if err != nil || !reflect.DeepEqual(again, r) {
			t.Fatalf("ParseMask(%q) = %+v, written %q, read back %+v, %v", spec, r, r.String(), again, err)
		}
	})
}

// maskScene writes a 6 x 4 image and, on its grid, a UInt16 quality band
// with bit 15 set in column 0 and bit 2 in row 3, and a Byte class band
// holding x+y. Which pixel passes which rule is known by construction.
func maskScene(t *testing.T, dir string) (image, qa, class string) {
	t.Helper()
	img := defaultRaster()
	img.w, img.h, img.bands = 6, 4, 2
	image = img.write(t, filepath.Join(dir, "image.tif"))
	q := img
	q.bands, q.dtype = 1, godal.UInt16
	q.values = func(x, y, _ int) float64 {
		v := 0x0100 // bit 8, in no rule
		if x == 0 {
			v |= 1 << 15
		}
		if y == 3 {
			v |= 1 << 2
		}
		return float64(v)
	}
	qa = q.write(t, filepath.Join(dir, "qa.tif"))
	c := img
	c.bands, c.dtype = 1, godal.Byte
	c.values = func(x, y, _ int) float64 { return float64(x + y) }
	class = c.write(t, filepath.Join(dir, "class.tif"))
	return image, qa, class
}

func TestMaskRules(t *testing.T) {
	dir := t.TempDir()
	image, qa, class := maskScene(t, dir)
	const w, h = 6, 4
	tests := []struct {
		name    string
		paths   []string
		rules   []string
		invalid func(x, y int) bool
	}{
		{"plain: non-zero is valid", []string{image}, []string{class}, func(x, y int) bool { return x+y == 0 }},
		{"bit 15", []string{image}, []string{qa + ":bits=15"}, func(x, y int) bool { return x == 0 }},
		{"bits 0-2", []string{image}, []string{qa + ":bits=0-2"}, func(x, y int) bool { return y == 3 }},
		{"bits 2,15", []string{image}, []string{qa + ":bits=2,15"}, func(x, y int) bool { return x == 0 || y == 3 }},
		{"a bit no pixel has", []string{image}, []string{qa + ":bits=9-14"}, func(x, y int) bool { return false }},
		{"values with a range", []string{image}, []string{class + ":values=0,3,6-7"}, func(x, y int) bool {
			s := x + y
			return s == 0 || s == 3 || s == 6 || s == 7
		}},
		{"rules combine", []string{image}, []string{qa + ":bits=15", class + ":values=8"}, func(x, y int) bool { return x == 0 || x+y == 8 }},
		{"mask is a stack file", []string{image, qa}, []string{qa + ":bits=15"}, func(x, y int) bool { return x == 0 }},
	}
	for _, tc := range tests {
		var rules []MaskRule
		for _, spec := range tc.rules {
			r, err := ParseMask(spec)
			if err != nil {
				t.Fatal(err)
			}
			rules = append(rules, r)
		}
		s, err := Open(tc.paths, MaskRules(rules...))
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		_, valid, n := readAll(t, s)
		want := 0
		for y := range h {
			for x := range w {
				if valid[y*w+x] == tc.invalid(x, y) {
					t.Errorf("%s: pixel (%d,%d) valid=%v", tc.name, x, y, valid[y*w+x])
				}
				if !tc.invalid(x, y) {
					want++
				}
			}
		}
		if n != want {
			t.Errorf("%s: %d valid pixels, want %d", tc.name, n, want)
		}
		if len(s.Masks) != len(rules) || s.Masks[0] != rules[0].Path {
			t.Errorf("%s: Masks %v", tc.name, s.Masks)
		}
	}
}

// TestMaskNoData: a mask pixel equal to the mask band's nodata is invalid
// under every rule (known by construction).
func TestMaskNoData(t *testing.T) {
	dir := t.TempDir()
	image, _, _ := maskScene(t, dir)
	m := defaultRaster()
	m.w, m.h, m.bands, m.dtype = 6, 4, 1, godal.Byte
	nd := 255.0
	m.nodata = &nd
	m.values = func(x, y, _ int) float64 {
		if x == 5 {
			return 255
		}
		return 1
	}
	mask := m.write(t, filepath.Join(dir, "nd.tif"))
	for _, spec := range []string{mask, mask + ":bits=7", mask + ":values=3"} {
		r, _ := ParseMask(spec)
		s, err := Open([]string{image}, MaskRules(r))
		if err != nil {
			t.Fatal(err)
		}
		_, valid, n := readAll(t, s)
		if n != 4*5 || valid[5] || !valid[4] {
			t.Errorf("%s: %d valid pixels, want 20 (all but column 5)", spec, n)
		}
	}
}

func TestMaskErrors(t *testing.T) {
	dir := t.TempDir()
	image, qa, class := maskScene(t, dir)
	f := defaultRaster()
	f.w, f.h, f.bands = 6, 4, 1
	float := f.write(t, filepath.Join(dir, "float.tif"))
	coarse := defaultRaster()
	coarse.w, coarse.h, coarse.bands = 3, 2, 1
	coarse.gt[1], coarse.gt[5] = 20, -20
	other := coarse.write(t, filepath.Join(dir, "coarse.tif"))
	tests := []struct {
		spec string
		want []string
		is   error
	}{
		{filepath.Join(dir, "missing.tif"), []string{"missing.tif"}, ErrNotFound},
		// Issue 24, item 9: a bit rule that cannot apply to the mask's
		// type is the user's rule that is wrong (ErrBadSpec, exit 2).
		{float + ":bits=1", []string{"float.tif", "integer", "Float32"}, ErrBadSpec},
		{class + ":bits=8", []string{"class.tif", "bit 8", "8 bits", "Byte"}, ErrBadSpec},
		{qa + ":bits=16", []string{"qa.tif", "bit 16", "16 bits", "UInt16"}, ErrBadSpec},
		{other, []string{"coarse.tif", "3x2 pixels of 20 x 20", "6x4 pixels of 10 x 10", "image.tif", "--align"}, ErrGridMismatch},
	}
	for _, tc := range tests {
		r, err := ParseMask(tc.spec)
		if err != nil {
			t.Fatal(err)
		}
		_, err = Open([]string{image}, MaskRules(r))
		if err == nil || strings.Contains(err.Error(), "\n") || (tc.is != nil && !errors.Is(err, tc.is)) {
			t.Errorf("%s: got %v, want a one-line error", tc.spec, err)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: %q does not say %q", tc.spec, err, w)
			}
		}
	}
	// Issue 24, item 4: a complex mask is refused, naming it.
	cm := defaultRaster()
	cm.w, cm.h, cm.bands, cm.dtype = 6, 4, 1, godal.CInt16
	cmask := cm.write(t, filepath.Join(dir, "cmask.tif"))
	if _, err := Open([]string{image}, Mask(cmask)); !errors.Is(err, ErrComplex) || !strings.Contains(err.Error(), "band 1 of "+cmask+" is complex (CInt16)") {
		t.Errorf("complex mask: got %v, want ErrComplex naming the file", err)
	}
	// Masks hold codes: only nearest and mode may warp them.
	if _, err := Open([]string{image}, Mask(other), AlignMasks("bilinear")); !errors.Is(err, ErrBadSpec) {
		t.Errorf("bilinear mask warp: got %v, want ErrBadSpec", err)
	}
}

// TestMaskAligned warps a quality mask of 20 m pixels onto the image's
// 10 m grid with nearest neighbour: image pixel (x, y) lies inside mask
// pixel (x/2, y/2), so its value is known by construction.
func TestMaskAligned(t *testing.T) {
	dir := t.TempDir()
	image, _, _ := maskScene(t, dir)
	q := defaultRaster()
	q.w, q.h, q.bands, q.dtype = 3, 2, 1, godal.UInt16
	q.gt[1], q.gt[5] = 20, -20
	q.values = func(x, y, _ int) float64 {
		if x == 1 && y == 1 {
			return 1 << 15
		}
		return 1 << 3
	}
	qa := q.write(t, filepath.Join(dir, "qa20.tif"))
	r, _ := ParseMask(qa + ":bits=15")
	for _, opt := range []Option{AlignMasks("nearest"), AlignStack("bilinear")} {
		s, err := Open([]string{image}, MaskRules(r), opt)
		if err != nil {
			t.Fatal(err)
		}
		_, valid, n := readAll(t, s)
		for y := range 4 {
			for x := range 6 {
				if want := !(x/2 == 1 && y/2 == 1); valid[y*6+x] != want {
					t.Errorf("pixel (%d,%d) valid=%v, want %v", x, y, valid[y*6+x], want)
				}
			}
		}
		if n != 24-4 || len(s.Aligned) != 1 || s.Aligned[0] != qa || s.Masks[0] != qa {
			t.Errorf("%d valid pixels (want 20), aligned %v, masks %v", n, s.Aligned, s.Masks)
		}
		vrt := s.maskSources[0]
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
		if _, err := openDataset(vrt); err == nil {
			t.Errorf("the mask's VRT %s opens after Close", vrt)
		}
	}
}

// TestNamedQualityRules: each product quality name stands for the bits or
// values of its product guide (USGS Landsat 8-9 Collection 2 Level 2
// Science Product Guide, QA_PIXEL bit index; ESA Sentinel-2 Level-2A scene
// classification values), so the named rule equals its bits= or values=
// spelling.
func TestNamedQualityRules(t *testing.T) {
	tests := []struct{ named, plain string }{
		{"qa.tif:qa_pixel=fill,cloud,cloud_shadow", "qa.tif:bits=0,3,4"},
		{"qa.tif:qa_pixel=Dilated-Cloud,cirrus,snow,water", "qa.tif:bits=1,2,5,7"},
		{"qa.tif:qa_pixel=clouds", "qa.tif:bits=1-4"},
		{"scl.jp2:scl=no_data,saturated_or_defective,cloud_shadows", "scl.jp2:values=0,1,3"},
		{"scl.jp2:scl=cloud_high_probability,cloud_medium_probability,thin_cirrus,snow", "scl.jp2:values=8,9,10,11"},
		{"scl.jp2:scl=clouds", "scl.jp2:values=3,8,9,10"},
		{"scl.jp2:scl=cast_shadows,dark_area_pixels", "scl.jp2:values=2"},
		{"/vsizip/a.zip/x:y.tif:scl=water", "/vsizip/a.zip/x:y.tif:values=6"},
	}
	for _, tc := range tests {
		named, err := ParseMask(tc.named)
		if err != nil {
			t.Fatalf("%s: %v", tc.named, err)
		}
		plain, err := ParseMask(tc.plain)
		if err != nil {
			t.Fatalf("%s: %v", tc.plain, err)
		}
		if !reflect.DeepEqual(named, plain) {
			t.Errorf("%s = %+v, want %+v (%s)", tc.named, named, plain, tc.plain)
		}
	}
	for _, bad := range []string{"qa.tif:qa_pixel=clear", "qa.tif:qa_pixel=", "scl.jp2:scl=cloudy", "qa.tif:scl=cloud"} {
		if _, err := ParseMask(bad); !errors.Is(err, ErrBadSpec) || !strings.Contains(err.Error(), "name") {
			t.Errorf("%s: %v, want a bad-spec error about the name", bad, err)
		}
	}
}
