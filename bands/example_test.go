package bands_test

import (
	"encoding/json"
	"errors"
	"fmt"

	"bandfold/bands"
)

func ExampleAccumulator() {
	// Four pixels of three bands, pixel-major; the third pixel is nodata.
	x := []float64{
		10, 200, 3000,
		12, 190, 3100,
		-9999, -9999, -9999,
		14, 230, 2900,
	}
	valid := []bool{true, true, false, true}

	a := bands.NewAccumulator(3)
	a.AddPixels(x, valid)

	fmt.Println("count:", a.Count())
	fmt.Printf("mean:  %.3f\n", a.Mean(nil))
	fmt.Printf("sd:    %.3f\n", a.StdDev(nil))
	fmt.Printf("min:   %.0f\n", a.Min(nil))
	fmt.Printf("max:   %.0f\n", a.Max(nil))
	cov := a.Covariance(nil)
	for i := range 3 {
		fmt.Printf("cov:   %9.3f %9.3f %9.3f\n", cov.At(i, 0), cov.At(i, 1), cov.At(i, 2))
	}
	// Output:
	// count: 3
	// mean:  [12.000 206.667 3000.000]
	// sd:    [2.000 20.817 100.000]
	// min:   [10 190 2900]
	// max:   [14 230 3100]
	// cov:       4.000    30.000  -100.000
	// cov:      30.000   433.333 -2000.000
	// cov:    -100.000 -2000.000 10000.000
}

func ExampleAccumulator_Merge() {
	// Two tiles accumulated separately, for example by two workers, and
	// merged in tile order give the statistics of all their pixels.
	tile0 := bands.NewAccumulator(2)
	tile0.AddPixels([]float64{1, 2, 2, 4}, nil)
	tile1 := bands.NewAccumulator(2)
	tile1.AddPixels([]float64{3, 6, 4, 8, 5, 10}, nil)

	tile0.Merge(tile1)
	fmt.Println("count:", tile0.Count())
	fmt.Printf("mean:  %.4f\n", tile0.Mean(nil))
	cov := tile0.Covariance(nil)
	fmt.Printf("cov:   %.4f %.4f %.4f\n", cov.At(0, 0), cov.At(0, 1), cov.At(1, 1))
	corr, err := tile0.Correlation(nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("corr:  %.4f\n", corr.At(0, 1))
	// Output:
	// count: 5
	// mean:  [3.0000 6.0000]
	// cov:   2.5000 5.0000 10.0000
	// corr:  1.0000
}

func ExampleAccumulator_Correlation() {
	names := []string{"red", "nir", "saturated"}
	a := bands.NewAccumulator(3)
	a.AddPixels([]float64{
		0.1, 0.4, 1,
		0.2, 0.5, 1,
		0.3, 0.7, 1,
	}, nil)
	_, err := a.Correlation(nil)
	var zv *bands.ZeroVarianceError
	if errors.As(err, &zv) {
		fmt.Printf("band %q is constant: %v\n", names[zv.Band], err)
	}
	fmt.Println(errors.Is(err, bands.ErrZeroVariance))
	// Output:
	// band "saturated" is constant: bands: band 2 has zero variance
	// true
}

func ExampleFromState() {
	// A shard writes its partial result as JSON.
	a := bands.NewAccumulator(2)
	a.AddPixels([]float64{1, 10, 2, 20, 3, 30}, nil)
	data, err := json.Marshal(a.State())
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(string(data))

	// A merge step reads partial results back and merges them.
	var s bands.State
	if err := json.Unmarshal(data, &s); err != nil {
		fmt.Println(err)
		return
	}
	b, err := bands.FromState(s)
	if err != nil {
		fmt.Println(err)
		return
	}
	b.Merge(a)
	fmt.Println("count:", b.Count())

	s.Count = -1
	_, err = bands.FromState(s)
	fmt.Println(err)
	// Output:
	// {"count":3,"mean":[2,20],"comoment":[[2,20],[20,200]],"min":[1,10],"max":[3,30]}
	// count: 6
	// invalid state: count -1 is not a finite non-negative number
}
