package bands

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/stat"

	"bandfold/tiles/testenv"
)

// irisPath is Fisher's iris data as shipped in Debian's python3-sklearn
// (sklearn/datasets/data/iris.csv): a header line "150,4,setosa,…", then 150
// rows of four measurements in cm and a class label. `make testdata` fetches
// it.
const irisPath = "../testdata/external/iris.csv"

// readIris returns the 150×4 measurements, pixel-major.
func readIris(t *testing.T) []float64 {
	t.Helper()
	f, err := os.Open(irisPath)
	if errors.Is(err, fs.ErrNotExist) {
		testenv.Missing(t, "%s is absent: run `make testdata` to fetch it from Debian's python3-sklearn", irisPath)
	}
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	records, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(records) != 151 || records[0][0] != "150" || records[0][1] != "4" {
		t.Fatalf("%s: unexpected layout: %d records, header %v", irisPath, len(records), records[0])
	}
	var x []float64
	for i, rec := range records[1:] {
		if len(rec) != 5 {
			t.Fatalf("%s: row %d has %d fields, want 5", irisPath, i+1, len(rec))
		}
		for _, s := range rec[:4] {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("%s: row %d: %v", irisPath, i+1, err)
			}
			x = append(x, v)
		}
	}
	return x
}

// irisTwoPass holds statistics of pixel-major data computed by the textbook
// two-pass method, written out here so that it shares no code with
// Accumulator (nor with gonum): pass one sums each band and divides by n;
// pass two sums the products of deviations from those means and divides by
// n − 1.
type irisTwoPass struct {
	mean, sd []float64
	cov      [][]float64 // sample covariance, n − 1 denominator
	corr     [][]float64 // cov[j][k] / (sd[j] sd[k])
}

func twoPass(x []float64, p int) irisTwoPass {
	n := len(x) / p
	r := irisTwoPass{mean: make([]float64, p), sd: make([]float64, p), cov: make([][]float64, p), corr: make([][]float64, p)}
	for i := range n {
		for j := range p {
			r.mean[j] += x[i*p+j]
		}
	}
	for j := range p {
		r.mean[j] /= float64(n)
	}
	for j := range p {
		r.cov[j], r.corr[j] = make([]float64, p), make([]float64, p)
		for k := range p {
			var s float64
			for i := range n {
				s += (x[i*p+j] - r.mean[j]) * (x[i*p+k] - r.mean[k])
			}
			r.cov[j][k] = s / float64(n-1)
		}
	}
	for j := range p {
		r.sd[j] = math.Sqrt(r.cov[j][j])
	}
	for j := range p {
		for k := range p {
			r.corr[j][k] = r.cov[j][k] / (r.sd[j] * r.sd[k])
		}
	}
	return r
}

// tolIris bounds the elementwise relative difference between two float64
// computations of the same iris statistic that differ only in the order of
// their operations. Each statistic is a sum of at most 150 terms, so rounding
// moves it by at most about 150 ε ≈ 1.7e-14 of the sum of the terms'
// magnitudes; for the weakest correlation (sepal length with sepal width,
// r ≈ −0.118) that sum is at most 1/0.118 ≈ 8.5 times the result (by
// Cauchy–Schwarz), so the bound is about 1.4e-13 of the result. 1e-12 leaves a margin over that and
// is still far below anything a wrong formula (a wrong denominator moves a
// result by 1/150) or a lost pixel would produce.
const tolIris = 1e-12

// TestIris checks the means, standard deviations, covariances and
// correlations of Fisher's iris data, accumulated by Accumulator in unequal
// chunks, against a plain two-pass computation of the same file (the
// reference) and against gonum's stat.MeanStdDev, stat.Covariance and
// stat.Correlation.
func TestIris(t *testing.T) {
	const p = 4
	x := readIris(t)
	if n := len(x) / p; n != 150 {
		t.Fatalf("%d iris rows, want 150", n)
	}
	ref := twoPass(x, p)

	a := NewAccumulator(p)
	// Feed the rows in unequal parts to exercise the merge of chunks.
	for _, part := range [][2]int{{0, 1}, {1, 40}, {40, 41}, {41, 150}} {
		a.AddPixels(x[part[0]*p:part[1]*p], nil)
	}
	corr, err := a.Correlation(nil)
	if err != nil {
		t.Fatal(err)
	}
	cov := a.Covariance(nil)
	mean, sd := a.Mean(nil), a.StdDev(nil)

	// gonum's in-memory routines on the columns of the same data.
	cols := make([][]float64, p)
	for j := range p {
		for i := range len(x) / p {
			cols[j] = append(cols[j], x[i*p+j])
		}
	}

	check := func(what string, got, want float64) {
		t.Helper()
		if d := math.Abs(got-want) / math.Abs(want); !(d <= tolIris) {
			t.Errorf("%s = %.17g, want %.17g (relative difference %.2g > %g)", what, got, want, d, tolIris)
		}
	}
	for j := range p {
		gMean, gSD := stat.MeanStdDev(cols[j], nil)
		// Accumulator against the two-pass reference.
		check(fmt.Sprintf("Accumulator mean[%d]", j), mean[j], ref.mean[j])
		check(fmt.Sprintf("Accumulator sd[%d]", j), sd[j], ref.sd[j])
		// gonum against the two-pass reference, and Accumulator against gonum.
		check(fmt.Sprintf("stat.MeanStdDev mean[%d]", j), gMean, ref.mean[j])
		check(fmt.Sprintf("stat.MeanStdDev sd[%d]", j), gSD, ref.sd[j])
		check(fmt.Sprintf("Accumulator mean[%d] vs stat.MeanStdDev", j), mean[j], gMean)
		check(fmt.Sprintf("Accumulator sd[%d] vs stat.MeanStdDev", j), sd[j], gSD)
		for k := range p {
			gCov := stat.Covariance(cols[j], cols[k], nil)
			gCorr := stat.Correlation(cols[j], cols[k], nil)
			check(fmt.Sprintf("Accumulator covariance(%d, %d)", j, k), cov.At(j, k), ref.cov[j][k])
			check(fmt.Sprintf("Accumulator correlation(%d, %d)", j, k), corr.At(j, k), ref.corr[j][k])
			check(fmt.Sprintf("stat.Covariance(%d, %d)", j, k), gCov, ref.cov[j][k])
			check(fmt.Sprintf("stat.Correlation(%d, %d)", j, k), gCorr, ref.corr[j][k])
			check(fmt.Sprintf("Accumulator correlation(%d, %d) vs stat.Correlation", j, k), corr.At(j, k), gCorr)
		}
	}

	// An additional cross-check, not the reference: values R prints for its
	// own copy of the iris data (colMeans(iris[, 1:4]), sapply(iris[, 1:4],
	// sd), cor(iris$Petal.Length, iris$Petal.Width) and
	// cor(iris$Sepal.Length, iris$Petal.Length)), quoted from memory. The
	// reference computation above must round to every printed digit: it may
	// differ from each by at most half a unit in the last printed place.
	for _, c := range []struct {
		name   string
		got    float64
		want   float64
		places int // decimals printed
	}{
		{"mean[0]", ref.mean[0], 5.843333, 6},
		{"mean[1]", ref.mean[1], 3.057333, 6},
		{"mean[2]", ref.mean[2], 3.758000, 6},
		{"mean[3]", ref.mean[3], 1.199333, 6},
		{"sd[0]", ref.sd[0], 0.8280661, 7},
		{"sd[1]", ref.sd[1], 0.4358663, 7},
		{"sd[2]", ref.sd[2], 1.7652982, 7},
		{"sd[3]", ref.sd[3], 0.7622377, 7},
		{"correlation(2, 3)", ref.corr[2][3], 0.9628654, 7},
		{"correlation(0, 2)", ref.corr[0][2], 0.8717538, 7},
	} {
		if half := 0.5 * math.Pow(10, -float64(c.places)); math.Abs(c.got-c.want) > half*(1+1e-9) {
			t.Errorf("two-pass %s = %.*f, but R prints %.*f (quoted from memory)", c.name, c.places+2, c.got, c.places, c.want)
		}
	}
}
