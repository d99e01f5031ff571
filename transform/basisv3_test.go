package transform

import (
	"errors"
	"slices"
	"strings"
	"testing"
)

// v3Basis is the golden basis as a version 3 file that kept bands 2 and 4
// of a 5-band stack (known by construction).
func v3Basis() *Basis {
	b := goldenBasis()
	b.Version, b.Method = 3, PCA
	b.SourceBands = &SourceBands{Count: 5, Numbers: []int{2, 4}}
	return b
}

// TestSourceBandsRoundTrip: a version 3 basis keeps its source bands through
// its file, and bases and partials of versions 1 and 2 stay readable while
// those that carry source bands, or a version 3 file with source bands that
// do not fit its bands, are refused as malformed naming the member.
func TestSourceBandsRoundTrip(t *testing.T) {
	got := roundTrip(t, v3Basis(), (*Basis).Marshal, parseBasis)
	if sel, ok := got.Selection(); !ok || sel.Count != 5 || !slices.Equal(sel.Numbers, []int{2, 4}) {
		t.Errorf("selection %+v %v, want bands 2 and 4 of 5", sel, ok)
	}
	for _, tc := range []struct {
		name string
		edit func(*Basis)
		want string // "" for a basis that must read
	}{
		{"version 1 without", func(b *Basis) { b.Version, b.Method, b.SourceBands = 1, "", nil }, ""},
		{"version 2 without", func(b *Basis) { b.Version, b.SourceBands = 2, nil }, ""},
		{"version 3 without", func(b *Basis) { b.SourceBands = nil }, ""},
		{"version 2 with", func(b *Basis) { b.Version = 2 }, "version 2 with source_bands"},
		{"version 1 with", func(b *Basis) { b.Version, b.Method = 1, "" }, "version 1 with members of later versions"},
		{"one number for two bands", func(b *Basis) { b.SourceBands.Numbers = []int{2} }, "source_bands has 1 numbers for 2 bands"},
		{"count below bands", func(b *Basis) { b.SourceBands.Count = 1 }, "count 1 is below the 2 bands kept"},
		{"number 0", func(b *Basis) { b.SourceBands.Numbers = []int{0, 4} }, "band number 0 is not one of 1..5 once"},
		{"number beyond count", func(b *Basis) { b.SourceBands.Numbers = []int{2, 6} }, "band number 6 is not one of 1..5 once"},
		{"number twice", func(b *Basis) { b.SourceBands.Numbers = []int{4, 4} }, "band number 4 is not one of 1..5 once"},
		{"names", func(b *Basis) { b.SourceBands = &SourceBands{Names: []string{"B02", "B8A"}} }, ""},
		{"names and numbers", func(b *Basis) { b.SourceBands.Names = []string{"B02", "B8A"} }, "names must be 2 band names, without count or numbers"},
		{"one name for two bands", func(b *Basis) { b.SourceBands = &SourceBands{Names: []string{"B02"}} }, "names must be 2 band names"},
	} {
		b := v3Basis()
		tc.edit(b)
		err := b.validate()
		switch {
		case tc.want == "" && err != nil:
			t.Errorf("%s: %v", tc.name, err)
		case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
			t.Errorf("%s: %v, want an error containing %q", tc.name, err, tc.want)
		}
	}
	if _, err := parseBasis(editJSON(t, func(m map[string]any) { m["version"] = 4 })); !errors.Is(err, ErrUnknownVersion) {
		t.Errorf("version 4: %v, want ErrUnknownVersion", err)
	}
}

// TestSelection: which bands of its stack a basis kept, from each kind of
// file (known by construction from the members set).
func TestSelection(t *testing.T) {
	two := func(src1, src2 string, idx1, idx2 int) []Band {
		bs := testBands(2)
		bs[0].Source, bs[0].Index, bs[1].Source, bs[1].Index = src1, idx1, src2, idx2
		return bs
	}
	excl := []Excluded{{Band: 2, Name: "x", Reason: "--exclude"}}
	for _, tc := range []struct {
		name string
		b    Basis
		want SourceBands
		ok   bool
	}{
		{"version 3, some bands", Basis{SourceBands: &SourceBands{Count: 6, Numbers: []int{2, 4}}}, SourceBands{Count: 6, Numbers: []int{2, 4}}, true},
		{"version 3, every band", Basis{SourceBands: &SourceBands{Count: 2, Numbers: []int{1, 2}}}, SourceBands{Count: 2, Numbers: []int{1, 2}}, false},
		{"version 3, reordered", Basis{SourceBands: &SourceBands{Count: 2, Numbers: []int{2, 1}}}, SourceBands{Count: 2, Numbers: []int{2, 1}}, true},
		{"version 3, by name", Basis{SourceBands: &SourceBands{Names: []string{"B02", "B8A"}}}, SourceBands{Names: []string{"B02", "B8A"}}, true},
		{"version 3 without source bands", Basis{Version: 3, Bands: two("a.tif", "a.tif", 3, 5), Excluded: excl}, SourceBands{}, false},
		{"version 2, one file", Basis{Bands: two("a.tif", "a.tif", 3, 5), Excluded: excl}, SourceBands{Numbers: []int{3, 5}}, true},
		{"version 2, two files", Basis{Bands: two("a.tif", "b.tif", 1, 1), Excluded: excl}, SourceBands{Count: 3, Numbers: []int{1, 3}}, true},
		{"version 2, nothing excluded", Basis{Bands: two("a.tif", "a.tif", 3, 5)}, SourceBands{}, false},
	} {
		got, ok := tc.b.Selection()
		if ok != tc.ok || got.Count != tc.want.Count || !slices.Equal(got.Numbers, tc.want.Numbers) || !slices.Equal(got.Names, tc.want.Names) {
			t.Errorf("%s: %+v %v, want %+v %v", tc.name, got, ok, tc.want, tc.ok)
		}
	}
}

// TestFormatBandRanges: band numbers are written as --bands reads them, and
// read back the same (ParseBandRanges).
func TestFormatBandRanges(t *testing.T) {
	for _, tc := range []struct {
		in   []int
		want string
	}{
		{[]int{2, 4, 5, 6}, "2,4-6"},
		{[]int{1}, "1"},
		{[]int{1, 2, 3}, "1-3"},
		{[]int{7, 3, 4}, "7,3-4"},
	} {
		got := FormatBandRanges(tc.in)
		if got != tc.want {
			t.Errorf("FormatBandRanges(%v) = %q, want %q", tc.in, got, tc.want)
		}
		if back, err := ParseBandRanges(got); err != nil || !slices.Equal(back, tc.in) && slices.IsSorted(tc.in) {
			t.Errorf("ParseBandRanges(%q) = %v, %v; want %v", got, back, err, tc.in)
		}
	}
}
