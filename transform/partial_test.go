package transform

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"bandfold/bands"
)

// goldenPartial is a hand-made partial of shard 1 of 3: 10 pixels of 2 bands.
func goldenPartial() *Partial {
	b := goldenBasis()
	return &Partial{
		Format:   PartialFormat,
		Version:  1,
		Tool:     "bandfold 0.1.0",
		Created:  time.Date(2024, 5, 1, 9, 0, 0, 0, time.UTC),
		Shard:    1,
		Shards:   3,
		TileSize: 512,
		Stride:   4,
		Mode:     Covariance,
		Bands:    b.Bands,
		Inputs:   b.Inputs,
		State: bands.State{
			Count:    10,
			Mean:     []float64{0.12, 0.3},
			CoMoment: [][]float64{{18, 9}, {9, 18}},
			Min:      []float64{-0.05, 0.01},
			Max:      []float64{0.4, 0.9},
		},
	}
}

func TestPartialGolden(t *testing.T) {
	goldenRoundTrip(t, goldenPartial(), "partial_v1.golden.json", (*Partial).Marshal, ReadPartial)
}

// shards splits n seeded pixels of p bands into N shards of consecutive
// pixels and returns their partials, the whole data and file names.
func shards(t *testing.T, n, p, N int) ([]*Partial, []string, []float64) {
	t.Helper()
	x := correlated(80, n, p, 200)
	parts := make([]*Partial, N)
	paths := make([]string, N)
	for s := range N {
		acc := bands.NewAccumulator(p)
		acc.AddPixels(x[s*n/N*p:(s+1)*n/N*p], nil)
		pt := goldenPartial()
		pt.Shard, pt.Shards, pt.Bands, pt.State = s, N, testBands(p), acc.State()
		parts[s] = pt
		paths[s] = fmt.Sprintf("shard-%d.json", s)
	}
	return parts, paths, x
}

func TestPartialRoundTrip(t *testing.T) {
	parts, _, _ := shards(t, 100, 5, 1)
	pt := parts[0]
	pt.Created = time.Now().UTC()
	roundTrip(t, pt, (*Partial).Marshal, parsePartial)
	// An empty shard (no valid pixel) has no extremes and still round-trips.
	pt.State = bands.NewAccumulator(5).State()
	roundTrip(t, pt, (*Partial).Marshal, parsePartial)
}

func TestReadPartialRejects(t *testing.T) {
	for _, tc := range []struct {
		name string
		edit func(*Partial)
		want error
	}{
		{"version", func(p *Partial) { p.Version = 4 }, ErrUnknownVersion},
		{"format", func(p *Partial) { p.Format = BasisFormat }, ErrMalformed},
		{"shard out of range", func(p *Partial) { p.Shard = 3 }, ErrMalformed},
		{"negative shard", func(p *Partial) { p.Shard = -1 }, ErrMalformed},
		{"tile size", func(p *Partial) { p.TileSize = -1 }, ErrMalformed},
		{"stride", func(p *Partial) { p.Stride = 0 }, ErrMalformed},
		{"mode", func(p *Partial) { p.Mode = "" }, ErrMalformed},
		{"state bands", func(p *Partial) { p.State.Mean = []float64{1, 2, 3} }, ErrMalformed},
		{"state asymmetric", func(p *Partial) { p.State.CoMoment[0][1] = 8 }, bands.ErrInvalidState},
		{"state count", func(p *Partial) { p.State.Count = -1 }, bands.ErrInvalidState},
		{"source bands in version 2", func(p *Partial) {
			p.Version, p.SourceBands = 2, &SourceBands{Count: 3, Numbers: []int{1, 3}}
		}, ErrMalformed},
		{"source bands not one per band", func(p *Partial) {
			p.Version, p.SourceBands = 3, &SourceBands{Count: 3, Numbers: []int{3}}
		}, ErrMalformed},
	} {
		t.Run(tc.name, func(t *testing.T) {
			pt := goldenPartial()
			tc.edit(pt)
			// Bypass Marshal's check to produce the bad file.
			path := filepath.Join(t.TempDir(), "bad.json")
			data := mustJSON(t, pt)
			if err := os.WriteFile(path, data, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := ReadPartial(path)
			if !errors.Is(err, tc.want) || !strings.HasPrefix(err.Error(), "partial "+path+": ") {
				t.Errorf("ReadPartial: %v, want an error naming the file and wrapping %v", err, tc.want)
			}
			if _, err := pt.Marshal(); err == nil {
				t.Error("Marshal accepted it")
			}
		})
	}
}

func TestCheckSet(t *testing.T) {
	parts, paths, _ := shards(t, 90, 3, 3)
	if err := CheckSet(parts, paths); err != nil {
		t.Fatalf("complete set: %v", err)
	}
	with := func(i int, edit func(*Partial)) ([]*Partial, []string) {
		ps := append([]*Partial(nil), parts...)
		c := *ps[i]
		edit(&c)
		ps[i] = &c
		return ps, paths
	}
	for _, tc := range []struct {
		name  string
		parts []*Partial
		paths []string
		want  []string // substrings of the error
	}{
		{"empty", nil, nil, []string{"no partials"}},
		{"missing", []*Partial{parts[0], parts[2]}, []string{paths[0], paths[2]}, []string{"shard 1 of 3 missing"}},
		{"duplicated", append(parts[:3:3], parts[1]), append(paths[:3:3], "copy.json"),
			[]string{"partial copy.json: shard 1 of 3 duplicated (also in shard-1.json)"}},
		{"foreign N", func() []*Partial { ps, _ := with(2, func(p *Partial) { p.Shards = 4 }); return ps }(), paths,
			[]string{"partial shard-2.json: shard 2 is foreign: 4 shards (shard-0.json has 3 shards)", "shard 2 of 3 missing"}},
		{"foreign tile size", func() []*Partial { ps, _ := with(1, func(p *Partial) { p.TileSize = 256 }); return ps }(), paths,
			[]string{"shard-1.json: shard 1 is foreign: tile size 256 (shard-0.json has tile size 512)"}},
		{"foreign stride", func() []*Partial { ps, _ := with(1, func(p *Partial) { p.Stride = 1 }); return ps }(), paths,
			[]string{"shard-1.json: shard 1 is foreign: stride 1"}},
		{"foreign mode", func() []*Partial { ps, _ := with(1, func(p *Partial) { p.Mode = Correlation }); return ps }(), paths,
			[]string{"shard-1.json: shard 1 is foreign: mode correlation (shard-0.json has mode covariance)"}},
		{"foreign inputs", func() []*Partial {
			ps, _ := with(1, func(p *Partial) {
				p.Inputs = append([]Fingerprint(nil), p.Inputs...)
				p.Inputs[1].ModTime = p.Inputs[1].ModTime.Add(time.Second)
			})
			return ps
		}(), paths, []string{"shard-1.json: shard 1 is foreign: input 2 = scene/B5.tif"}},
		{"foreign band", func() []*Partial {
			ps, _ := with(2, func(p *Partial) {
				p.Bands = append([]Band(nil), p.Bands...)
				p.Bands[0].NoData = new(0.0)
			})
			return ps
		}(), paths, []string{"shard-2.json: shard 2 is foreign: band 1 = \"B1\" (scene.tif band 1, Float64, nodata 0"}},
		{"foreign source bands", func() []*Partial {
			ps, _ := with(1, func(p *Partial) { p.Version, p.SourceBands = 3, &SourceBands{Count: 4, Numbers: []int{1, 2, 4}} })
			return ps
		}(), paths, []string{"shard-1.json: shard 1 is foreign: source bands 1-2,4 of 4 (shard-0.json has source bands not recorded)"}},
		{"fewer bands", func() []*Partial { ps, _ := with(1, func(p *Partial) { p.Bands = p.Bands[:2] }); return ps }(), paths,
			[]string{"shard 1 is foreign: 2 bands (shard-0.json has 3 bands)"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := CheckSet(tc.parts, tc.paths)
			if err == nil {
				t.Fatal("CheckSet accepted the set")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
		})
	}
}

// TestCombine checks that merging the shards gives the statistics of all the
// pixels whatever the order of the files.
func TestCombine(t *testing.T) {
	const n, p = 300, 4
	parts, paths, x := shards(t, n, p, 3)
	acc, err := Combine(parts, paths)
	if err != nil {
		t.Fatal(err)
	}
	whole := bands.NewAccumulator(p)
	whole.AddPixels(x, nil)
	if acc.Count() != n {
		t.Fatalf("count %v, want %d", acc.Count(), n)
	}
	checkRelSlice(t, "mean", acc.Mean(nil), whole.Mean(nil), 200, 1e-14)
	got, want := acc.Covariance(nil), whole.Covariance(nil)
	for i := range p {
		for j := range p {
			checkRel(t, "covariance", got.At(i, j), want.At(i, j), math.Abs(want.At(0, 0)), 1e-12)
		}
	}
	rev, err := Combine([]*Partial{parts[2], parts[0], parts[1]}, []string{paths[2], paths[0], paths[1]})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(rev.State(), acc.State()) {
		t.Error("Combine depends on the order of the partials")
	}
	if _, err := Combine(parts[:2], paths[:2]); err == nil {
		t.Error("Combine accepted an incomplete set")
	}
}

// FuzzReadPartial is FuzzReadBasis for partial files; a partial has no
// fingerprint, so the marshalled bytes must be stable instead.
func FuzzReadPartial(f *testing.F) {
	for _, name := range []string{"partial_v1.golden.json", "basis_v1.golden.json"} {
		data, err := os.ReadFile(filepath.Join("testdata", name))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
		f.Add(data[:len(data)/2])
	}
	empty := goldenPartial()
	empty.Bands[0].NoData = new(math.NaN())
	empty.State = bands.NewAccumulator(2).State()
	data, err := empty.Marshal()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(data)
	f.Add([]byte(`{"format":"bandfold-partial","version":1,"state":{}}`))
	exact := goldenPartial()
	acc := bands.NewExactAccumulator(2)
	acc.AddPixels([]float64{1, 2, 3, 5, -4, 4}, nil)
	exact.State = acc.State()
	if data, err = exact.Marshal(); err != nil {
		f.Fatal(err)
	}
	f.Add(data)
	f.Fuzz(func(t *testing.T, data []byte) {
		pt, err := parsePartial(data)
		if err != nil {
			if pt != nil {
				t.Fatal("non-nil partial with an error")
			}
			return
		}
		out, err := pt.Marshal()
		if err != nil {
			t.Fatalf("parsed partial does not marshal: %v", err)
		}
		again, err := parsePartial(out)
		if err != nil {
			t.Fatalf("marshalled partial does not parse: %v", err)
		}
		if out2, err := again.Marshal(); err != nil || string(out2) != string(out) {
			t.Fatalf("second round trip changed the file (%v)", err)
		}
		if foreign(pt, again) != "" || pt.Shard != again.Shard {
			t.Fatalf("round trip changed the job: %s", foreign(pt, again))
		}
	})
}
