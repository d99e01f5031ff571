package transform_test

import (
	"fmt"
	"log"

	"gonum.org/v1/gonum/mat"

	"bandfold/bands"
	"bandfold/transform"
)

func ExampleDecompose() {
	// The covariance of two bands with equal variance 2 and covariance 1.
	cov := mat.NewSymDense(2, []float64{
		2, 1,
		1, 2,
	})
	d, err := transform.Decompose(cov)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("eigenvalues %.4f\n", d.Values)
	fmt.Printf("component 1 %.4f\n", mat.Col(nil, 0, d.Vectors))
	fmt.Printf("component 2 %.4f\n", mat.Col(nil, 1, d.Vectors))
	fmt.Printf("explained %.4f\n", transform.Explained(d.Values))
	// Output:
	// eigenvalues [3.0000 1.0000]
	// component 1 [0.7071 0.7071]
	// component 2 [0.7071 -0.7071]
	// explained [0.7500 0.2500]
}

func ExampleComponentsFor() {
	// Covariance eigenvalues of Fisher's iris data.
	values := []float64{4.2282, 0.2427, 0.0782, 0.0238}
	fmt.Printf("cumulative %.4f\n", transform.Cumulative(values))
	for _, f := range []float64{0.9, 0.95, 0.99} {
		fmt.Printf("%.0f%% of the variance: %d components\n", 100*f, transform.ComponentsFor(values, f))
	}
	fmt.Println("broken stick:", transform.BrokenStick(values))
	// Output:
	// cumulative [0.9246 0.9777 0.9948 1.0000]
	// 90% of the variance: 1 components
	// 95% of the variance: 2 components
	// 99% of the variance: 3 components
	// broken stick: 1
}

func ExampleProjector_Fold() {
	// Six pixels of two bands, pixel-major (scikit-learn's PCA example).
	x := []float64{-1, -1, -2, -1, -3, -2, 1, 1, 2, 1, 3, 2}
	acc := bands.NewAccumulator(2)
	acc.AddPixels(x, nil)
	bs := []transform.Band{
		{Name: "a", Source: "a.tif", Index: 1, DataType: "Int16", Scale: 1, Min: -32768, Max: 32767},
		{Name: "b", Source: "a.tif", Index: 2, DataType: "Int16", Scale: 1, Min: -32768, Max: 32767},
	}
	basis, err := transform.NewBasis(transform.Covariance, bs, int64(acc.Count()), acc.Mean(nil), acc.Covariance(nil))
	if err != nil {
		log.Fatal(err)
	}
	pr, err := transform.NewProjector(basis, 1)
	if err != nil {
		log.Fatal(err)
	}
	y := make([]float64, 6) // one score per pixel
	pr.Fold(y, x)
	fmt.Printf("scores %.4f\n", y)

	xh := make([]float64, len(x))
	pr.Unfold(xh, y)
	loss := transform.NewLoss(2)
	loss.Add(x, xh, nil)
	r := loss.Report()
	fmt.Printf("RMSE %.4f, band RMSE %.4f, mean SAM %.2f°\n", r.RMSE, r.BandRMSE, r.MeanSAM)
	// Output:
	// scores [-1.3834 -2.2219 -3.6053 1.3834 2.2219 3.6053]
	// RMSE 0.1587, band RMSE [0.1223 0.1882], mean SAM 6.37°
}

func ExampleInt16Scaling() {
	// A component of variance 202.0922 (σ = 14.2159) is stored with a step
	// of 16σ/32767.
	scale, offset := transform.Int16Scaling(202.0922)
	fmt.Printf("scale %.6f offset %g\n", scale, offset)
	q := transform.QuantizeInt16(-3.5, scale, offset)
	fmt.Printf("-3.5 is stored as %d and read back as %.4f\n", q, float64(q)*scale+offset)
	// Output:
	// scale 0.006942 offset 0
	// -3.5 is stored as -504 and read back as -3.4986
}

func ExampleSpectralAngle() {
	a := []float64{0.10, 0.20, 0.30}
	fmt.Printf("%.2f°\n", transform.SpectralAngle(a, []float64{0.05, 0.10, 0.15})*180/3.141592653589793)
	fmt.Printf("%.2f°\n", transform.SpectralAngle([]float64{1, 0}, []float64{1, 1})*180/3.141592653589793)
	// Output:
	// 0.00°
	// 45.00°
}
