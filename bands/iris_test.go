package bands

import (
	"encoding/csv"
	"errors"
	"io/fs"
	"math"
	"os"
	"strconv"
	"testing"
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
		t.Skipf("%s is absent: run `make testdata` to fetch it from Debian's python3-sklearn", irisPath)
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

func TestIris(t *testing.T) {
	const p = 4
	x := readIris(t)
	ref := referenceStats(x, nil, p)

	a := NewAccumulator(p)
	// Feed the rows in unequal parts to exercise the merge of chunks.
	for _, part := range [][2]int{{0, 1}, {1, 40}, {40, 41}, {41, 150}} {
		a.AddPixels(x[part[0]*p:part[1]*p], nil)
	}

	// gonum stat.CovarianceMatrix and stat.MeanStdDev (reference library).
	checkRel(t, "covariance", relDiffSym(a.Covariance(nil), ref.cov), tolExact)
	checkRel(t, "mean", relDiff(a.Mean(nil), ref.mean), tolExact)
	checkRel(t, "sd", relDiff(a.StdDev(nil), ref.sd), tolExact)

	// Published values, printed to 7 significant digits, so compared to a
	// relative 1e-6 (the printing error is below 1e-7 relative).
	const tolPrinted = 1e-6
	for _, c := range []struct {
		name      string
		got, want []float64
	}{
		// R's colMeans(iris[, 1:4]), quoted from memory.
		{"mean", a.Mean(nil), []float64{5.843333, 3.057333, 3.758000, 1.199333}},
		// R's sapply(iris[, 1:4], sd), quoted from memory.
		{"sd", a.StdDev(nil), []float64{0.8280661, 0.4358663, 1.7652982, 0.7622377}},
	} {
		for i := range c.want {
			if d := math.Abs(c.got[i]-c.want[i]) / math.Abs(c.want[i]); d > tolPrinted {
				t.Errorf("%s[%d] = %.7f, want %.7f (relative difference %.2g)", c.name, i, c.got[i], c.want[i], d)
			}
		}
	}
	corr, err := a.Correlation(nil)
	if err != nil {
		t.Fatal(err)
	}
	// R's cor(iris$Petal.Length, iris$Petal.Width) and
	// cor(iris$Sepal.Length, iris$Petal.Length), quoted from memory.
	for _, c := range []struct {
		i, j int
		want float64
	}{{2, 3, 0.9628654}, {0, 2, 0.8717538}} {
		if got := corr.At(c.i, c.j); math.Abs(got-c.want)/c.want > tolPrinted {
			t.Errorf("correlation(%d, %d) = %.7f, want %.7f", c.i, c.j, got, c.want)
		}
	}
}
