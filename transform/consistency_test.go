package transform

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// cloneBasis returns a deep copy of b, through JSON (NaN nodata aside, which
// the tests here do not use).
func cloneBasis(t *testing.T, b *Basis) *Basis {
	t.Helper()
	c := new(Basis)
	if err := json.Unmarshal(mustJSON(t, b), c); err != nil {
		t.Fatal(err)
	}
	return c
}

// TestReadBasisRefusesContradictions corrupts a basis fitted on constructed
// data in each way a hand edit or a mix-up of files could, and checks that
// ReadBasis refuses every one with a one-line error naming the file and the
// field, where before these files folded images with exit status 0.
func TestReadBasisRefusesContradictions(t *testing.T) {
	const p = 5
	fitted := map[Mode]*Basis{
		Covariance:  fit(t, Covariance, correlated(91, 400, p, 300), p),
		Correlation: fit(t, Correlation, correlated(92, 400, p, 300), p),
	}
	for _, tc := range []struct {
		name string
		edit func(*Basis)
		want string // the field the error must name
	}{
		{"eigenvectors replaced by the identity", func(b *Basis) {
			for i := range b.Eigenvectors {
				for j := range b.Eigenvectors[i] {
					b.Eigenvectors[i][j] = 0
				}
				b.Eigenvectors[i][i] = 1
			}
		}, "eigenvectors[0]"},
		{"two eigenvector rows swapped", func(b *Basis) {
			b.Eigenvectors[1], b.Eigenvectors[2] = b.Eigenvectors[2], b.Eigenvectors[1]
		}, "eigenvectors[1]"},
		{"eigenvalues ×100", func(b *Basis) { floats.Scale(100, b.Eigenvalues) }, "eigenvalues"},
		{"covariance ×100", func(b *Basis) {
			for _, row := range b.Covariance {
				floats.Scale(100, row)
			}
		}, "covariance[0][0]"},
		{"stddev ×10", func(b *Basis) { floats.Scale(10, b.StdDev) }, "stddev[0]"},
		{"mean + 1e6", func(b *Basis) { floats.AddConst(1e6, b.Mean) }, "mean[0]"},
		{"mode flipped", func(b *Basis) {
			if b.Mode == Covariance {
				b.Mode = Correlation
			} else {
				b.Mode = Covariance
			}
		}, "eigenvalues"},
		{"huge mean", func(b *Basis) { b.Mean[2] = 1.7e308 }, "mean[2] = 1.7e+308 is beyond ±1e+150"},
		{"huge eigenvalue", func(b *Basis) { b.Eigenvalues[0] = 1e301 }, "eigenvalues[0] = 1e+301 is beyond"},
		{"huge band range", func(b *Basis) { b.Bands[3].Max = 1e151 }, "bands[3].max = 1e+151 is beyond"},
		{"one eigenvalue off by 1e-6·λ₁", func(b *Basis) { b.Eigenvalues[1] += 1e-6 * b.Eigenvalues[0] }, "eigenvalues"},
	} {
		for _, mode := range []Mode{Covariance, Correlation} {
			t.Run(tc.name+"/"+string(mode), func(t *testing.T) {
				b := cloneBasis(t, fitted[mode])
				tc.edit(b)
				path := filepath.Join(t.TempDir(), "corrupt.json")
				if err := os.WriteFile(path, mustJSON(t, b), 0o644); err != nil {
					t.Fatal(err)
				}
				_, err := ReadBasis(path)
				if !errors.Is(err, ErrMalformed) {
					t.Fatalf("ReadBasis: %v, want an error wrapping ErrMalformed", err)
				}
				msg := err.Error()
				if !strings.HasPrefix(msg, "basis "+path+": ") || !strings.Contains(msg, tc.want) || strings.Contains(msg, "\n") {
					t.Errorf("error %q is not one line naming the file and %q", msg, tc.want)
				}
			})
		}
	}
	// A tiny standard deviation in correlation mode would blow scores up.
	b := cloneBasis(t, fitted[Correlation])
	b.StdDev[0], b.Covariance[0][0] = 1e-160, 1e-320
	if err := b.validate(); err == nil || !strings.Contains(err.Error(), "stddev[0]") {
		t.Errorf("stddev 1e-160 in correlation mode: %v", err)
	}
	// The uncorrupted bases pass.
	for mode, b := range fitted {
		if err := b.validate(); err != nil {
			t.Errorf("%s: fitted basis refused: %v", mode, err)
		}
	}
}

// TestValidateAcceptsFittedBases: no basis NewBasis computes is refused by
// the consistency checks, including wide eigenvalue spreads, constant and
// rank-deficient covariances (eigenvalues clamped to zero) and many bands.
// The covariance is gonum's stat.CovarianceMatrix, an independent reference.
func TestValidateAcceptsFittedBases(t *testing.T) {
	for _, tc := range []struct {
		name string
		n, p int
		edit func(x []float64, p int)
	}{
		{"7 bands", 500, 7, nil},
		{"40 bands", 2000, 40, nil},
		{"rank deficient: 30 pixels of 60 bands", 30, 60, nil},
		{"constant band", 300, 4, func(x []float64, p int) {
			for i := 2; i < len(x); i += p {
				x[i] = 7
			}
		}},
		{"duplicated band", 300, 4, func(x []float64, p int) {
			for i := 0; i < len(x); i += p {
				x[i+3] = x[i]
			}
		}},
	} {
		x := correlated(uint64(tc.n*tc.p), tc.n, tc.p, 1000)
		if tc.edit != nil {
			tc.edit(x, tc.p)
		}
		data := mat.NewDense(tc.n, tc.p, x)
		var cov mat.SymDense
		stat.CovarianceMatrix(&cov, data, nil)
		mean := make([]float64, tc.p)
		bs := testBands(tc.p)
		for j := range tc.p {
			col := mat.Col(nil, j, data)
			mean[j] = stat.Mean(col, nil)
			bs[j].Min, bs[j].Max = floats.Min(col), floats.Max(col)
		}
		for _, mode := range []Mode{Covariance, Correlation} {
			b, err := NewBasis(mode, bs, int64(tc.n), mean, &cov)
			if mode == Correlation && (tc.name == "constant band") {
				if err == nil {
					t.Errorf("%s, %s: NewBasis accepted a constant band", tc.name, mode)
				}
				continue
			}
			if err != nil {
				t.Errorf("%s, %s: %v", tc.name, mode, err)
				continue
			}
			if _, err := parseBasis(mustJSON(t, b)); err != nil {
				t.Errorf("%s, %s: written basis refused: %v", tc.name, mode, err)
			}
		}
	}
}

// TestNaNNoData: a NaN nodata value, the usual one of floating-point
// rasters, is written as "nan" and read back as NaN, in a basis and in a
// partial; ±Inf is refused.
func TestNaNNoData(t *testing.T) {
	b := goldenBasis()
	b.Bands[1].NoData = new(math.NaN())
	data, err := b.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(data), `"nodata": "nan"`) || !strings.Contains(string(data), `"nodata": -9999`) {
		t.Errorf("NaN nodata not written as \"nan\":\n%s", data)
	}
	got, err := parseBasis(data)
	if err != nil {
		t.Fatal(err)
	}
	if nd := got.Bands[1].NoData; nd == nil || !math.IsNaN(*nd) {
		t.Errorf("nodata read back as %v, want NaN", nd)
	}
	if nd := got.Bands[0].NoData; nd == nil || *nd != -9999 {
		t.Errorf("numeric nodata read back as %v, want -9999", nd)
	}
	again, err := got.Marshal()
	if err != nil || string(again) != string(data) {
		t.Errorf("second round trip changed the file (%v)", err)
	}
	// Other spellings of NaN are read too; anything else is refused.
	for _, tc := range []struct {
		nodata string
		ok     bool
	}{
		{`"NaN"`, true}, {`"nan"`, true}, {`null`, true}, {`0`, true}, {`-3.4e38`, true},
		{`"inf"`, false}, {`"-Inf"`, false}, {`"0"`, false}, {`1e999`, false}, {`true`, false},
	} {
		text := strings.Replace(string(data), `"nodata": "nan"`, `"nodata": `+tc.nodata, 1)
		_, err := parseBasis([]byte(text))
		if (err == nil) != tc.ok {
			t.Errorf("nodata %s: error %v, want ok %v", tc.nodata, err, tc.ok)
		}
		if err != nil && !errors.Is(err, ErrMalformed) {
			t.Errorf("nodata %s: error %v does not wrap ErrMalformed", tc.nodata, err)
		}
	}
	for _, inf := range []float64{math.Inf(1), math.Inf(-1)} {
		c := goldenBasis()
		c.Bands[0].NoData = new(inf)
		if _, err := c.Marshal(); err == nil || !strings.Contains(err.Error(), "band 1: nodata") {
			t.Errorf("nodata %v: Marshal error %v, want a refusal naming band 1's nodata", inf, err)
		}
	}

	// Partials carry the bands the same way, and two shards with NaN nodata
	// are one job.
	pt := goldenPartial()
	pt.Bands = append([]Band(nil), pt.Bands...)
	pt.Bands[1].NoData = new(math.NaN())
	data, err = pt.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	gotPt, err := parsePartial(data)
	if err != nil {
		t.Fatal(err)
	}
	if nd := gotPt.Bands[1].NoData; nd == nil || !math.IsNaN(*nd) {
		t.Errorf("partial nodata read back as %v, want NaN", nd)
	}
	other := *gotPt
	other.Shard = 0
	if why := foreign(&other, pt); why != "" {
		t.Errorf("shards with NaN nodata are foreign: %s", why)
	}
}

// TestBandFileMirrorsBand: the file form of Band has the same members, names
// and order, so that Marshal writes what Band's tags document.
func TestBandFileMirrorsBand(t *testing.T) {
	bt, ft := reflect.TypeFor[Band](), reflect.TypeFor[bandFile]()
	if bt.NumField() != ft.NumField() {
		t.Fatalf("Band has %d fields, bandFile %d", bt.NumField(), ft.NumField())
	}
	for i := range bt.NumField() {
		b, f := bt.Field(i), ft.Field(i)
		if b.Name != f.Name || b.Tag != f.Tag {
			t.Errorf("field %d: Band.%s %q, bandFile.%s %q", i, b.Name, b.Tag, f.Name, f.Tag)
		}
		if b.Name != "NoData" && b.Type != f.Type {
			t.Errorf("field %s: Band has %v, bandFile %v", b.Name, b.Type, f.Type)
		}
	}
}
