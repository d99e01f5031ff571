package change_test

import (
	"fmt"
	"math"
	"math/rand/v2"

	"bandfold/transform/change"
)

func ExampleParseThreshold() {
	for _, s := range []string{"chisq:0.99", "sigma:3", "otsu", "value:25", "chisq:1", "median"} {
		t, err := change.ParseThreshold(s)
		if err != nil {
			fmt.Println(err)
			continue
		}
		cut, err := t.Resolve(3, []float64{0.5, 2, 3, 40})
		fmt.Printf("%s: trim %v, Z > %.3f (%v)\n", t, t.Trim(), cut, err)
	}
	// Output:
	// chisq:0.99: trim 0.99, Z > 11.345 (<nil>)
	// sigma:3: trim 0.999, Z > 104.307 (<nil>)
	// otsu: trim 0.999, Z > 11.650 (<nil>)
	// value:25: trim 0.999, Z > 25.000 (<nil>)
	// threshold "chisq:1": quantile 1 not in (0, 1)
	// threshold "median": unknown rule "median" (want chisq:Q, sigma:N, otsu or value:Z)
}

func ExampleFit() {
	// Differences of two component scores over 10 000 pixels: no change is
	// N((1, -2), [[1, 0.5], [0.5, 1]]); every 20th pixel changed a lot.
	rng := rand.New(rand.NewPCG(1, 1))
	const n, k = 10_000, 2
	sampler := change.NewSampler(2_000, k, 7)
	for i := range n {
		a, b := rng.NormFloat64(), rng.NormFloat64()
		d := []float64{1 + a, -2 + 0.5*a + 0.866*b}
		if i%20 == 0 {
			d[0] += 25
		}
		sampler.Offer(int64(i), d)
	}
	_, sample := sampler.Pixels()

	th, _ := change.ParseThreshold(change.DefaultThreshold)
	m, err := change.Fit(sample, k, th.Trim())
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("location %.1f %.1f, correlation %.1f, %.2f of the sample left out\n", m.Location[0], m.Location[1],
		m.Covariance.At(0, 1)/math.Sqrt(m.Covariance.At(0, 0)*m.Covariance.At(1, 1)), float64(m.Flagged)/float64(m.Sample))
	cut, _ := th.Resolve(k, nil)
	sc := m.Scorer()
	z, top := sc.ZTop([]float64{26, -2})
	fmt.Printf("Z = %.0f > %.2f: changed, mostly in component %d, p = %.1e\n", z, cut, top, change.PValue(z, k))
	// Output:
	// location 1.0 -2.0, correlation 0.5, 0.05 of the sample left out
	// Z = 842 > 13.82: changed, mostly in component 0, p = 1.4e-183
}
