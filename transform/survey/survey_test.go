package survey

import (
	"math"
	"testing"
)

// The worked example of Olofsson et al. (2014), section 5: four map
// classes (deforestation, forest gain, stable forest, stable non-forest)
// mapped over 200,000; 150,000; 3,200,000 and 6,450,000 pixels of 30 m x 30 m,
// and sample counts by map class (rows) and reference class (columns).
var (
	exampleCounts = [][]int{{66, 0, 5, 4}, {0, 55, 8, 12}, {1, 0, 153, 11}, {2, 1, 9, 313}}
	examplePixels = []float64{200000, 150000, 3200000, 6450000}
)

func exampleAreasHa() []float64 {
	a := make([]float64, len(examplePixels))
	for i, p := range examplePixels {
		a[i] = p * 900 / 1e4
	}
	return a
}

// TestOlofssonWorkedExample compares the estimator with the figures
// published for the worked example, to their printed precision: areas and
// 95% half-widths in whole hectares, accuracies to two decimals.
func TestOlofssonWorkedExample(t *testing.T) {
	e, err := Olofsson(exampleCounts, exampleAreasHa())
	if err != nil {
		t.Fatal(err)
	}
	// Source: Olofsson et al. (2014), section 5 (estimated areas with 95%
	// confidence intervals, user's, producer's and overall accuracy).
	area := []float64{21158, 11686, 285770, 581386}
	half := []float64{6158, 3756, 15510, 16282}
	users := []float64{0.88, 0.73, 0.93, 0.96}
	prod := []float64{0.75, 0.85, 0.93, 0.96}
	prodHalf := []float64{0.21, 0.25, 0.03, 0.02}
	for k := range area {
		a, h := e.Area[k]*e.Total, 1.96*e.AreaSE[k]*e.Total
		if math.Abs(a-area[k]) > 0.5 || math.Abs(h-half[k]) > 0.5 {
			t.Errorf("class %d: area %.1f ± %.1f ha, published %.0f ± %.0f", k+1, a, h, area[k], half[k])
		}
		if math.Abs(e.Users[k]-users[k]) > 0.005 {
			t.Errorf("class %d: user's accuracy %.4f, published %.2f", k+1, e.Users[k], users[k])
		}
		if math.Abs(e.Producers[k]-prod[k]) > 0.005 || math.Abs(1.96*e.ProducersSE[k]-prodHalf[k]) > 0.005 {
			t.Errorf("class %d: producer's accuracy %.4f ± %.4f, published %.2f ± %.2f", k+1, e.Producers[k], 1.96*e.ProducersSE[k], prod[k], prodHalf[k])
		}
	}
	if math.Abs(e.Overall-0.95) > 0.005 || math.Abs(1.96*e.OverallSE-0.02) > 0.005 {
		t.Errorf("overall accuracy %.4f ± %.4f, published 0.95 ± 0.02", e.Overall, 1.96*e.OverallSE)
	}
	t.Logf("areas %.0f %.0f %.0f %.0f ha, half-widths %.0f %.0f %.0f %.0f ha, overall %.4f ± %.4f",
		e.Area[0]*e.Total, e.Area[1]*e.Total, e.Area[2]*e.Total, e.Area[3]*e.Total,
		1.96*e.AreaSE[0]*e.Total, 1.96*e.AreaSE[1]*e.Total, 1.96*e.AreaSE[2]*e.Total, 1.96*e.AreaSE[3]*e.Total, e.Overall, 1.96*e.OverallSE)
}

// exampleUnits expands the worked example's counts into sample units whose
// strata are the map classes.
func exampleUnits() []Unit {
	var us []Unit
	for i, row := range exampleCounts {
		for j, n := range row {
			for range n {
				us = append(us, Unit{Stratum: i, Map: i, Ref: j})
			}
		}
	}
	return us
}

// TestStehmanReducesToOlofsson: with strata equal to the map classes,
// Stehman's (2014) estimators are the stratified estimator (Stehman 2014,
// section 3), on the same data, to rounding.
func TestStehmanReducesToOlofsson(t *testing.T) {
	o, err := Olofsson(exampleCounts, exampleAreasHa())
	if err != nil {
		t.Fatal(err)
	}
	s, err := Stehman(exampleUnits(), exampleAreasHa(), 4)
	if err != nil {
		t.Fatal(err)
	}
	pairs := []struct {
		name string
		a, b []float64
	}{
		{"area", o.Area, s.Area}, {"area se", o.AreaSE, s.AreaSE}, {"users", o.Users, s.Users}, {"users se", o.UsersSE, s.UsersSE},
		{"producers", o.Producers, s.Producers}, {"producers se", o.ProducersSE, s.ProducersSE},
		{"overall", []float64{o.Overall, o.OverallSE}, []float64{s.Overall, s.OverallSE}},
	}
	for i := range o.ErrorMatrix {
		pairs = append(pairs, struct {
			name string
			a, b []float64
		}{"error matrix row", o.ErrorMatrix[i], s.ErrorMatrix[i]})
	}
	for _, p := range pairs {
		for k := range p.a {
			if math.Abs(p.a[k]-p.b[k]) > 1e-12*math.Max(1, math.Abs(p.a[k])) {
				t.Errorf("%s %d: Olofsson %.15g, Stehman %.15g", p.name, k+1, p.a[k], p.b[k])
			}
		}
	}
}

// TestStehmanOwnStrata: a stratum that is part of a map class (known by
// construction): splitting a map class into two strata with the same
// reference mix leaves the estimates of the unsplit design.
func TestStehmanOwnStrata(t *testing.T) {
	// Two map classes; map class 0 split into strata 0 and 2 of areas 30
	// and 60, each with the same reference mix (8 of 10 correct).
	var split, whole []Unit
	mix := func(stratum, m, n, right int) []Unit {
		var us []Unit
		for i := range n {
			ref := 1 - m
			if i < right {
				ref = m
			}
			us = append(us, Unit{Stratum: stratum, Map: m, Ref: ref})
		}
		return us
	}
	split = append(append(append(split, mix(0, 0, 10, 8)...), mix(1, 1, 20, 18)...), mix(2, 0, 10, 8)...)
	whole = append(append(whole, mix(0, 0, 20, 16)...), mix(1, 1, 20, 18)...)
	a, err := Stehman(split, []float64{30, 100, 60}, 2)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Stehman(whole, []float64{90, 100}, 2)
	if err != nil {
		t.Fatal(err)
	}
	for k := range 2 {
		if math.Abs(a.Area[k]-b.Area[k]) > 1e-12 || math.Abs(a.Users[k]-b.Users[k]) > 1e-12 || math.Abs(a.Producers[k]-b.Producers[k]) > 1e-12 {
			t.Errorf("class %d: split %v/%v/%v, whole %v/%v/%v", k, a.Area[k], a.Users[k], a.Producers[k], b.Area[k], b.Users[k], b.Producers[k])
		}
	}
	if _, err := Stehman(mix(0, 0, 1, 1), []float64{1}, 2); err == nil {
		t.Error("a stratum of one unit gave no error")
	}
}

// TestCochranByHand: two strata of shares 0.1 (change, expected user's
// accuracy 0.7) and 0.9 (no change, 0.95), target standard error 0.01 of the
// change proportion, infinite population. By hand:
// S = sqrt(0.21) = 0.458258 and sqrt(0.0475) = 0.217945;
// sum W S = 0.0458258 + 0.1961505 = 0.2419763; squared 0.0585525;
// divided by 0.01^2: 585.5, so 586 units. With N = 10,000 pixels the
// denominator gains (0.1*0.21 + 0.9*0.0475)/10000 = 6.375e-6, giving
// 0.0585525 / 1.06375e-4 = 550.4, so 551.
func TestCochranByHand(t *testing.T) {
	for _, c := range []struct {
		pixels, want int
	}{{0, 586}, {10000, 551}} {
		if n := CochranSize([]float64{0.1, 0.9}, []float64{0.7, 0.95}, 0.01, c.pixels); n != c.want {
			t.Errorf("N = %d: %d units, by hand %d", c.pixels, n, c.want)
		}
	}
}

// TestAllocate: cases worked by hand.
func TestAllocate(t *testing.T) {
	cases := []struct {
		name      string
		areas     []float64
		available []int
		n, min    int
		want      []int
		fails     bool
	}{
		// 3% change: proportional gives 9 of 300, raised to 50; the other
		// 250 go to no change.
		{"minimum", []float64{3, 97}, []int{3000, 97000}, 300, 50, []int{50, 250}, false},
		// Proportional everywhere: 40/60 of 200.
		{"proportional", []float64{40, 60}, []int{4000, 6000}, 200, 50, []int{80, 120}, false},
		// Three strata, two below the minimum.
		{"buffer", []float64{1, 2, 97}, []int{100, 200, 9700}, 400, 50, []int{50, 50, 300}, false},
		// A stratum of 20 pixels gives all of them.
		{"small stratum", []float64{0.2, 99.8}, []int{20, 9980}, 100, 50, []int{20, 80}, false},
		{"too many", []float64{1, 1}, []int{10, 10}, 21, 2, nil, true},
		{"too few for the minimum", []float64{1, 99}, []int{100, 9900}, 60, 50, nil, true},
		{"one per stratum", []float64{1, 1}, []int{1, 100}, 50, 2, nil, true},
	}
	for _, c := range cases {
		got, err := Allocate(c.areas, c.available, c.n, c.min)
		if c.fails {
			if err == nil {
				t.Errorf("%s: %v, want an error", c.name, got)
			}
			continue
		}
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		for h := range got {
			if got[h] != c.want[h] {
				t.Errorf("%s: %v, by hand %v", c.name, got, c.want)
				break
			}
		}
	}
}

// TestDraw: distinct, sorted, in range, reproducible and seed-dependent.
func TestDraw(t *testing.T) {
	counts, sizes := []int{100, 5, 1000}, []int{10, 5, 50}
	a, b, c := Draw(counts, sizes, 1), Draw(counts, sizes, 1), Draw(counts, sizes, 2)
	same := true
	for h := range counts {
		if len(a[h]) != sizes[h] {
			t.Fatalf("stratum %d: %d ranks, want %d", h, len(a[h]), sizes[h])
		}
		for i, r := range a[h] {
			if r < 0 || r >= counts[h] || (i > 0 && r <= a[h][i-1]) || r != b[h][i] {
				t.Fatalf("stratum %d: ranks %v", h, a[h])
			}
			same = same && r == c[h][i]
		}
	}
	if same {
		t.Error("seeds 1 and 2 drew the same sample")
	}
}
