package transform

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mat"

	"bandfold/bands"
	"bandfold/tiles/testenv"
)

// relDiff returns |got − want| / max(|want|, ref): the error relative to
// want, or to ref where |want| is smaller. ref is the natural scale of the
// quantity compared, for example 1 for shares of a total or λ₁ for
// eigenvalues, so that values near zero are not held to an impossible
// relative precision. ref = 0 gives the plain relative error.
func relDiff(got, want, ref float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Max(math.Abs(want), ref)
}

// checkRel reports an error if relDiff(got, want, ref) > tol.
func checkRel(t *testing.T, what string, got, want, ref, tol float64) {
	t.Helper()
	if d := relDiff(got, want, ref); !(d <= tol) {
		t.Errorf("%s = %.12g, want %.12g (relative error %.3g > %.3g)", what, got, want, d, tol)
	}
}

// checkRelSlice applies checkRel element by element.
func checkRelSlice(t *testing.T, what string, got, want []float64, ref, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s has %d elements, want %d", what, len(got), len(want))
	}
	for i := range got {
		checkRel(t, what+"["+strconv.Itoa(i)+"]", got[i], want[i], ref, tol)
	}
}

// testBands returns p plausible band descriptions, with no valid range
// recorded (Min and Max 0).
func testBands(p int) []Band {
	bs := make([]Band, p)
	for j := range bs {
		bs[j] = Band{
			Name: "B" + strconv.Itoa(j+1), Source: "scene.tif", Index: j + 1,
			DataType: "Float64", Scale: 1,
		}
	}
	return bs
}

// fit accumulates the pixel-major block x of p bands with bands.Accumulator
// and fits a basis to it, recording each band's range as learning does.
func fit(t testing.TB, mode Mode, x []float64, p int) *Basis {
	t.Helper()
	acc := bands.NewAccumulator(p)
	acc.AddPixels(x, nil)
	bs := testBands(p)
	lo, hi := acc.Min(nil), acc.Max(nil)
	for j := range bs {
		bs[j].Min, bs[j].Max = lo[j], hi[j]
	}
	b, err := NewBasis(mode, bs, int64(acc.Count()), acc.Mean(nil), acc.Covariance(nil))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// correlated returns n pixels of p correlated bands, pixel-major: a seeded
// random mixing of independent normal sources with standard deviations
// spread over two decades, around a mean of offset.
func correlated(seed uint64, n, p int, offset float64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 1))
	mix := make([]float64, p*p)
	for i := range mix {
		mix[i] = rng.NormFloat64()
	}
	x := make([]float64, n*p)
	z := make([]float64, p)
	for i := range n {
		for j := range z {
			z[j] = rng.NormFloat64() * math.Pow(100, -float64(j)/float64(max(p-1, 1)))
		}
		for j := range p {
			v := offset + float64(j)
			for l := range p {
				v += mix[j*p+l] * z[l]
			}
			x[i*p+j] = v
		}
	}
	return x
}

// readIris returns Fisher's iris measurements, 150 pixels of 4 "bands",
// from testdata/external/iris.csv as shipped by scikit-learn, skipping the
// test if the file is absent.
func readIris(t *testing.T) []float64 {
	t.Helper()
	f, err := os.Open("../testdata/external/iris.csv")
	if os.IsNotExist(err) {
		testenv.Missing(t, "iris data absent: run make testdata, or copy sklearn/datasets/data/iris.csv (Debian package python3-sklearn) to testdata/external/iris.csv")
	}
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	rows, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 151 || rows[0][0] != "150" || rows[0][1] != "4" {
		t.Fatalf("iris.csv: unexpected header %v or %d lines", rows[0], len(rows))
	}
	x := make([]float64, 0, 150*4)
	for _, row := range rows[1:] {
		for _, s := range row[:4] {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatal(err)
			}
			x = append(x, v)
		}
	}
	return x
}

// symOf returns the symmetric matrix with the given rows.
func symOf(rows ...[]float64) *mat.SymDense {
	p := len(rows)
	s := mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			s.SetSym(i, j, rows[i][j])
		}
	}
	return s
}

// mustJSON encodes v as JSON.
func mustJSON(t *testing.T, v any) []byte {
	t.Helper()
	data, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// foldWith folds the pixels x (pixel-major) onto the first k components of
// b; it returns the projector and the n·k scores.
func foldWith(t testing.TB, b *Basis, k int, x []float64) (*Projector, []float64) {
	t.Helper()
	pr, err := NewProjector(b, k)
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, len(x)/len(b.Bands)*k)
	pr.Fold(y, x)
	return pr, y
}
