package transform

import (
	"encoding/json"
	"errors"
	"flag"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"bandfold/bands"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// goldenBasis is a hand-made basis with exactly known numbers: covariance
// [[2,1],[1,2]], whose eigenvalues are 3 and 1 with eigenvectors (1,1)/√2 and
// (1,−1)/√2.
func goldenBasis() *Basis {
	r := 1 / math.Sqrt2
	nodata := -9999.0
	return &Basis{
		Format:  BasisFormat,
		Version: 1,
		Tool:    "bandfold 0.1.0",
		Created: time.Date(2024, 5, 1, 10, 30, 0, 0, time.UTC),
		Mode:    Covariance,
		Pixels:  1000,
		Stride:  4,
		Bands: []Band{
			{Name: "red", Source: "scene/B4.tif", Index: 1, DataType: "Int16", NoData: &nodata, Scale: 1e-4, Offset: 0, Min: -0.2, Max: 1.6},
			{Name: "nir [0.85 µm]", Source: "scene/B5.tif", Index: 1, DataType: "Float32", Scale: 1, Offset: 0, Min: -3.4028234663852886e38, Max: 3.4028234663852886e38},
		},
		Mean:         []float64{0.12, 0.3},
		StdDev:       []float64{math.Sqrt2, math.Sqrt2},
		Covariance:   [][]float64{{2, 1}, {1, 2}},
		Eigenvalues:  []float64{3, 1},
		Eigenvectors: [][]float64{{r, r}, {r, -r}},
		Components:   1,
		Inputs: []Fingerprint{
			{Path: "scene/B4.tif", Size: 123456, ModTime: time.Date(2024, 4, 30, 8, 0, 0, 0, time.UTC)},
			{Path: "scene/B5.tif", Size: 654321, ModTime: time.Date(2024, 4, 30, 8, 0, 1, 500, time.UTC)},
		},
	}
}

// checkGolden compares the file content got with testdata/name, or rewrites
// the latter with -update.
func checkGolden(t *testing.T, got []byte, name string) {
	t.Helper()
	golden := filepath.Join("testdata", name)
	if *update {
		if err := os.WriteFile(golden, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != string(want) {
		t.Errorf("content differs from %s (run go test -update to accept):\n%s", golden, got)
	}
}

// goldenRoundTrip marshals v, compares the bytes with testdata/name (written
// by the atomic file writer these types had before Marshal, so the format is
// unchanged) and reads that golden file back into a value equal to v.
func goldenRoundTrip[T any](t *testing.T, v *T, name string, marshal func(*T) ([]byte, error), read func(string) (*T, error)) {
	t.Helper()
	data, err := marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, data, name)
	got, err := read(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, v) {
		t.Errorf("golden %s read as\n%+v\nwant\n%+v", name, got, v)
	}
}

func TestBasisGolden(t *testing.T) {
	b := goldenBasis()
	goldenRoundTrip(t, b, "basis_v1.golden.json", (*Basis).Marshal, ReadBasis)
	// The fingerprint is a function of the numbers alone; the value is
	// pinned so that an accidental change of the hashed content shows.
	const fp = "bd17e0714702a1ab"
	if got := b.Fingerprint(); got != fp {
		t.Errorf("Fingerprint = %s, want %s", got, fp)
	}
}

// roundTrip marshals v, parses the bytes back, checks that nothing changed
// and returns what was parsed.
func roundTrip[T any](t *testing.T, v *T, marshal func(*T) ([]byte, error), parse func([]byte) (*T, error)) *T {
	t.Helper()
	data, err := marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	got, err := parse(data)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, v) {
		t.Errorf("round trip changed\n%+v\ninto\n%+v", v, got)
	}
	return got
}

// TestBasisRoundTrip marshals a fitted basis and parses it back: float64
// values survive JSON exactly.
func TestBasisRoundTrip(t *testing.T) {
	for _, mode := range []Mode{Covariance, Correlation} {
		b := fit(t, mode, correlated(70, 200, 7, 500), 7)
		b.Tool = "bandfold test"
		b.Components = 3
		b.Inputs = []Fingerprint{{Path: "a.tif", Size: 1, ModTime: time.Now().UTC()}}
		got := roundTrip(t, b, (*Basis).Marshal, parseBasis)
		if got.Fingerprint() != b.Fingerprint() {
			t.Errorf("%s: fingerprint changed", mode)
		}
	}
}

func TestBasisFingerprint(t *testing.T) {
	b := goldenBasis()
	fp := b.Fingerprint()
	if len(fp) != 16 {
		t.Errorf("Fingerprint %q is not 16 hex digits", fp)
	}
	same := goldenBasis()
	same.Tool, same.Created, same.Components, same.Inputs = "other", time.Now(), 2, nil
	if same.Fingerprint() != fp {
		t.Error("Fingerprint depends on descriptive fields")
	}
	for name, edit := range map[string]func(*Basis){
		"mean":        func(b *Basis) { b.Mean[1] = math.Nextafter(b.Mean[1], 1) },
		"mode":        func(b *Basis) { b.Mode = Correlation },
		"eigenvector": func(b *Basis) { b.Eigenvectors[1][1] = -b.Eigenvectors[1][1] },
		"covariance":  func(b *Basis) { b.Covariance[0][0] = 2.5 },
	} {
		c := goldenBasis()
		edit(c)
		if c.Fingerprint() == fp {
			t.Errorf("Fingerprint ignores a change of %s", name)
		}
	}
}

// editJSON returns the golden basis as JSON with edit applied to its decoded
// form.
func editJSON(t *testing.T, edit func(map[string]any)) []byte {
	t.Helper()
	data, err := json.Marshal(goldenBasis())
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(data, &m); err != nil {
		t.Fatal(err)
	}
	edit(m)
	if data, err = json.Marshal(m); err != nil {
		t.Fatal(err)
	}
	return data
}

func TestReadBasisRejects(t *testing.T) {
	good, err := json.Marshal(goldenBasis())
	if err != nil {
		t.Fatal(err)
	}
	text := string(good)
	for _, tc := range []struct {
		name string
		data []byte
		want error
	}{
		{"version 4", editJSON(t, func(m map[string]any) { m["version"] = 4 }), ErrUnknownVersion},
		{"no version", editJSON(t, func(m map[string]any) { delete(m, "version") }), ErrUnknownVersion},
		{"format", editJSON(t, func(m map[string]any) { m["format"] = PartialFormat }), ErrMalformed},
		{"not JSON", []byte("bandfold-basis v1"), ErrMalformed},
		{"empty", nil, ErrMalformed},
		{"truncated", good[:len(good)/2], ErrMalformed},
		{"trailing data", append(append([]byte(nil), good...), "{}"...), ErrMalformed},
		{"unknown member", editJSON(t, func(m map[string]any) { m["eigenvalue"] = 1 }), ErrMalformed},
		{"NaN", []byte(strings.Replace(text, `"mean":[0.12,`, `"mean":[NaN,`, 1)), ErrMalformed},
		{"overflow", []byte(strings.Replace(text, `"mean":[0.12,`, `"mean":[1e999,`, 1)), ErrMalformed},
		{"string number", []byte(strings.Replace(text, `"pixels":1000`, `"pixels":"1000"`, 1)), ErrMalformed},
		{"mode", editJSON(t, func(m map[string]any) { m["mode"] = "pca" }), ErrMalformed},
		{"short mean", editJSON(t, func(m map[string]any) { m["mean"] = []float64{1} }), ErrMalformed},
		{"long stddev", editJSON(t, func(m map[string]any) { m["stddev"] = []float64{1, 1, 1} }), ErrMalformed},
		{"covariance rows", editJSON(t, func(m map[string]any) { m["covariance"] = [][]float64{{2, 1}} }), ErrMalformed},
		{"ragged eigenvectors", editJSON(t, func(m map[string]any) { m["eigenvectors"] = [][]float64{{1, 0}, {0}} }), ErrMalformed},
		{"asymmetric covariance", editJSON(t, func(m map[string]any) { m["covariance"] = [][]float64{{2, 1}, {1.5, 2}} }), ErrMalformed},
		{"not orthonormal", editJSON(t, func(m map[string]any) { m["eigenvectors"] = [][]float64{{1, 0}, {1, 0}} }), ErrMalformed},
		{"ascending eigenvalues", editJSON(t, func(m map[string]any) { m["eigenvalues"] = []float64{1, 3} }), ErrMalformed},
		{"negative eigenvalue", editJSON(t, func(m map[string]any) { m["eigenvalues"] = []float64{3, -1} }), ErrMalformed},
		{"components 0", editJSON(t, func(m map[string]any) { m["components"] = 0 }), ErrMalformed},
		{"components 3", editJSON(t, func(m map[string]any) { m["components"] = 3 }), ErrMalformed},
		{"pixels 1", editJSON(t, func(m map[string]any) { m["pixels"] = 1 }), ErrMalformed},
		{"stride 0", editJSON(t, func(m map[string]any) { m["stride"] = 0 }), ErrMalformed},
		{"no bands", editJSON(t, func(m map[string]any) { m["bands"] = []any{} }), ErrMalformed},
		{"band index 0", editJSON(t, func(m map[string]any) { m["bands"].([]any)[0].(map[string]any)["index"] = 0 }), ErrMalformed},
		{"band scale 0", editJSON(t, func(m map[string]any) { m["bands"].([]any)[0].(map[string]any)["scale"] = 0 }), ErrMalformed},
		{"band range", editJSON(t, func(m map[string]any) { m["bands"].([]any)[0].(map[string]any)["min"] = 5 }), ErrMalformed},
		{"negative stddev", editJSON(t, func(m map[string]any) { m["stddev"] = []float64{-1, 1} }), ErrMalformed},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "bad.json")
			if err := os.WriteFile(path, tc.data, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err := ReadBasis(path)
			if !errors.Is(err, tc.want) {
				t.Fatalf("ReadBasis: %v, want an error wrapping %v", err, tc.want)
			}
			if !strings.HasPrefix(err.Error(), "basis "+path+": ") {
				t.Errorf("error %q does not name the file", err)
			}
		})
	}
	if _, err := ReadBasis(filepath.Join(t.TempDir(), "absent.json")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("ReadBasis of a missing file: %v", err)
	}
}

func TestBasisMarshal(t *testing.T) {
	data, err := goldenBasis().Marshal()
	if err != nil {
		t.Fatal(err)
	}
	if len(data) == 0 || data[len(data)-1] != '\n' {
		t.Errorf("Marshal output does not end in a newline")
	}
	if _, err := parseBasis(data); err != nil {
		t.Errorf("Marshal output does not parse: %v", err)
	}
	// An invalid basis is not marshalled.
	bad := goldenBasis()
	bad.Components = 5
	if data, err := bad.Marshal(); err == nil || data != nil || !strings.Contains(err.Error(), "components 5") {
		t.Errorf("Marshal of an invalid basis: %d bytes, %v", len(data), err)
	}
}

func TestNewBasis(t *testing.T) {
	cov := symOf([]float64{4, 2, 0}, []float64{2, 9, 0}, []float64{0, 0, 0})
	mean := []float64{1, 2, 3}
	b, err := NewBasis(Covariance, testBands(3), 10, mean, cov)
	if err != nil {
		t.Fatal(err)
	}
	// A constant band is fine in covariance mode: eigenvalue 0 exactly.
	checkRelSlice(t, "stddev", b.StdDev, []float64{2, 3, 0}, 0, 0)
	if b.Eigenvalues[2] != 0 || b.Components != 3 || b.Stride != 1 {
		t.Errorf("eigenvalues %v, components %d, stride %d", b.Eigenvalues, b.Components, b.Stride)
	}
	// …but not in correlation mode.
	if _, err := NewBasis(Correlation, testBands(3), 10, mean, cov); err == nil || !strings.Contains(err.Error(), "B3") {
		t.Errorf("correlation with a constant band: %v", err)
	}
	// Correlation mode decomposes R: r₁₂ = 2/(2·3) = 1/3, so λ = 1 ± 1/3
	// and a third eigenvalue 1 for the uncorrelated band.
	cov = symOf([]float64{4, 2, 0}, []float64{2, 9, 0}, []float64{0, 0, 1})
	b, err = NewBasis(Correlation, testBands(3), 10, mean, cov)
	if err != nil {
		t.Fatal(err)
	}
	checkRelSlice(t, "correlation eigenvalues", b.Eigenvalues, []float64{4.0 / 3, 1, 2.0 / 3}, 0, 1e-14)
	if KaiserCount(b.Eigenvalues) != 1 {
		t.Errorf("KaiserCount = %d, want 1 (4/3 > 1; exactly 1 is not kept)", KaiserCount(b.Eigenvalues))
	}

	for name, f := range map[string]func() (*Basis, error){
		"mode":      func() (*Basis, error) { return NewBasis("pca", testBands(3), 10, mean, cov) },
		"bands":     func() (*Basis, error) { return NewBasis(Covariance, testBands(2), 10, mean, cov) },
		"means":     func() (*Basis, error) { return NewBasis(Covariance, testBands(3), 10, mean[:2], cov) },
		"one pixel": func() (*Basis, error) { return NewBasis(Covariance, testBands(3), 1, mean, cov) },
		"NaN mean": func() (*Basis, error) {
			return NewBasis(Covariance, testBands(3), 10, []float64{1, math.NaN(), 3}, cov)
		},
		"NaN cov": func() (*Basis, error) {
			return NewBasis(Covariance, testBands(2), 10, mean[:2], symOf([]float64{1, math.NaN()}, []float64{0, 1}))
		},
		"indefinite": func() (*Basis, error) {
			return NewBasis(Covariance, testBands(2), 10, mean[:2], symOf([]float64{1, 2}, []float64{2, 1}))
		},
		"negative σ²": func() (*Basis, error) { return NewBasis(Covariance, testBands(1), 10, mean[:1], symOf([]float64{-1})) },
	} {
		if _, err := f(); err == nil {
			t.Errorf("NewBasis with bad %s succeeded", name)
		}
	}
}

// FuzzReadBasis checks that parsing arbitrary bytes never panics and that
// whatever parses is valid, marshals, and parses again to the same
// fingerprint and the same bytes.
func FuzzReadBasis(f *testing.F) {
	for _, name := range []string{"basis_v1.golden.json", "partial_v1.golden.json"} {
		data, err := os.ReadFile(filepath.Join("testdata", name))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
		f.Add(data[:len(data)/3])
	}
	nan := goldenBasis()
	nan.Bands[1].NoData = new(math.NaN())
	for _, b := range []*Basis{nan, fit(f, Correlation, correlated(93, 50, 3, 10), 3)} {
		data, err := b.Marshal()
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte(`{"format":"bandfold-basis","version":1}`))
	f.Add([]byte(`null`))
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := parseBasis(data)
		if err != nil {
			if b != nil {
				t.Fatal("non-nil basis with an error")
			}
			return
		}
		if err := b.validate(); err != nil {
			t.Fatalf("parsed basis is invalid: %v", err)
		}
		out, err := b.Marshal()
		if err != nil {
			t.Fatalf("parsed basis does not marshal: %v", err)
		}
		again, err := parseBasis(out)
		if err != nil {
			t.Fatalf("marshalled basis does not parse: %v", err)
		}
		if again.Fingerprint() != b.Fingerprint() {
			t.Fatal("fingerprint changed through a round trip")
		}
		if out2, err := again.Marshal(); err != nil || string(out2) != string(out) {
			t.Fatalf("second round trip changed the file (%v)", err)
		}
	})
}

// TestNewBasisTooLarge (issue 24, item 10): a covariance summed from
// values too large for float64 (an infinite variance, a NaN co-moment) is
// refused with bands.ErrTooLarge, which the caller wraps with the file,
// not "stddev[0] is NaN". Known by construction: the matrices hold +Inf and
// NaN.
func TestNewBasisTooLarge(t *testing.T) {
	for _, cov := range []*mat.SymDense{
		symOf([]float64{math.Inf(1), 0}, []float64{0, 1}),
		symOf([]float64{1, math.NaN()}, []float64{math.NaN(), 1}),
	} {
		_, err := NewBasis(Covariance, testBands(2), 10, []float64{1, 2}, cov)
		if !errors.Is(err, bands.ErrTooLarge) || strings.Contains(err.Error(), "NaN") {
			t.Errorf("NewBasis(%v) = %v, want bands.ErrTooLarge", mat.Formatted(cov), err)
		}
	}
}
