package transform

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

func TestParseMode(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Mode
		ok   bool
	}{
		{"covariance", Covariance, true},
		{"correlation", Correlation, true},
		{"Covariance", "", false},
		{"", "", false},
		{"pca", "", false},
	} {
		got, err := ParseMode(tc.in)
		if got != tc.want || (err == nil) != tc.ok {
			t.Errorf("ParseMode(%q) = %q, %v; want %q, ok %v", tc.in, got, err, tc.want, tc.ok)
		}
	}
}

// checkDecomposition checks the properties Decompose promises for a:
// descending eigenvalues, orthonormal vectors, A v = λ v and the sign rule.
// Residuals are relative to the largest eigenvalue magnitude.
func checkDecomposition(t *testing.T, a mat.Symmetric, d Decomposition) {
	t.Helper()
	p := a.SymmetricDim()
	scale := math.Max(math.Abs(d.Values[0]), math.Abs(d.Values[p-1]))
	for j := 1; j < p; j++ {
		if d.Values[j] > d.Values[j-1] {
			t.Errorf("eigenvalues not descending at %d: %v", j, d.Values)
		}
	}
	var vtv mat.Dense
	vtv.Mul(d.Vectors.T(), d.Vectors)
	if !mat.EqualApprox(&vtv, eye(p), 1e-13) {
		t.Errorf("VᵀV ≠ I:\n%v", mat.Formatted(&vtv))
	}
	av, v := make([]float64, p), make([]float64, p)
	for j := range p {
		mat.Col(v, j, d.Vectors)
		mat.NewVecDense(p, av).MulVec(a, mat.NewVecDense(p, v))
		for i := range p {
			if r := math.Abs(av[i]-d.Values[j]*v[i]) / scale; r > 1e-13 {
				t.Errorf("component %d: (A v − λ v)[%d] relative residual %.3g", j, i, r)
			}
		}
		// Sign rule: the first loading of largest magnitude (ties within
		// tieTol) is positive.
		big := floats.Max(absAll(v))
		for _, x := range v {
			if math.Abs(x) >= big*(1-tieTol) {
				if x <= 0 {
					t.Errorf("component %d: leading loading %v is not positive: %v", j, x, v)
				}
				break
			}
		}
	}
}

func eye(p int) *mat.Dense {
	m := mat.NewDense(p, p, nil)
	for i := range p {
		m.Set(i, i, 1)
	}
	return m
}

func absAll(v []float64) []float64 {
	a := make([]float64, len(v))
	for i, x := range v {
		a[i] = math.Abs(x)
	}
	return a
}

func TestDecomposeHandWorked(t *testing.T) {
	r := 1 / math.Sqrt2
	for _, tc := range []struct {
		name    string
		a       *mat.SymDense
		values  []float64
		vectors []float64 // row-major p×p, column j = component j
	}{
		{
			// [[2,1],[1,2]]: characteristic polynomial (2−λ)² − 1, so
			// λ = 3 with (1,1)/√2 and λ = 1 with (1,−1)/√2. The second
			// is a tie of magnitudes; the rule makes band 1 positive.
			name:    "2x2 tie",
			a:       symOf([]float64{2, 1}, []float64{1, 2}),
			values:  []float64{3, 1},
			vectors: []float64{r, r, r, -r},
		},
		{
			// [[3,0,1],[0,5,0],[1,0,3]]: band 2 is decoupled (λ = 5,
			// e₂); the 1–3 block is 3I + [[0,1],[1,0]], so λ = 4 with
			// (1,0,1)/√2 and λ = 2 with (1,0,−1)/√2, a tie of band 1
			// against band 3 resolved in favour of band 1.
			name: "3x3 tie",
			a: symOf(
				[]float64{3, 0, 1},
				[]float64{0, 5, 0},
				[]float64{1, 0, 3}),
			values: []float64{5, 4, 2},
			vectors: []float64{
				0, r, r,
				1, 0, 0,
				0, r, -r,
			},
		},
		{
			// Diagonal with a negative entry: eigenvalues are the
			// diagonal, sorted, and eigenvectors unit vectors made
			// positive.
			name:    "diagonal",
			a:       symOf([]float64{-2, 0, 0}, []float64{0, 7, 0}, []float64{0, 0, 1}),
			values:  []float64{7, 1, -2},
			vectors: []float64{0, 0, 1, 1, 0, 0, 0, 1, 0},
		},
		{
			// 1×1: the value itself and the vector (1).
			name:    "1x1",
			a:       symOf([]float64{4.5}),
			values:  []float64{4.5},
			vectors: []float64{1},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			d, err := Decompose(tc.a)
			if err != nil {
				t.Fatal(err)
			}
			checkRelSlice(t, "values", d.Values, tc.values, 1, 1e-14)
			checkRelSlice(t, "vectors", d.Vectors.RawMatrix().Data, tc.vectors, 1, 1e-14)
			checkDecomposition(t, tc.a, d)
		})
	}
}

// TestDecomposeVsPC compares Decompose of the sample covariance with gonum's
// stat.PC, which takes the SVD of the centred data instead, on seeded data.
func TestDecomposeVsPC(t *testing.T) {
	for _, tc := range []struct {
		seed uint64
		n, p int
	}{{1, 50, 3}, {2, 200, 7}, {3, 500, 12}} {
		x := correlated(tc.seed, tc.n, tc.p, 0)
		data := mat.NewDense(tc.n, tc.p, x)
		var cov mat.SymDense
		stat.CovarianceMatrix(&cov, data, nil)
		d, err := Decompose(&cov)
		if err != nil {
			t.Fatal(err)
		}
		checkDecomposition(t, &cov, d)

		var pc stat.PC
		if !pc.PrincipalComponents(data, nil) {
			t.Fatal("stat.PC failed")
		}
		vars := pc.VarsTo(nil)
		checkRelSlice(t, "eigenvalues vs stat.PC", d.Values, vars, vars[0], 1e-12)
		var vecs mat.Dense
		pc.VectorsTo(&vecs)
		for j := range tc.p {
			// Same direction up to sign: |⟨u, v⟩| = 1.
			dot := mat.Dot(d.Vectors.ColView(j), vecs.ColView(j))
			checkRel(t, "|⟨Decompose, stat.PC⟩| of component", math.Abs(dot), 1, 0, 1e-10)
		}
	}
}

// TestDecomposeConstructedSpectrum decomposes a covariance matrix built with
// a chosen spectrum, A = Q diag(λ) Qᵀ with Q orthonormal from the QR
// factorisation of a seeded random matrix. The eigenvalues are an arbitrary
// spectrum (distinct, spread over two orders of magnitude) and the truth is
// known by construction: they must come back in descending order, and the
// eigenvectors must be the columns of Q up to sign.
func TestDecomposeConstructedSpectrum(t *testing.T) {
	want := []float64{202.0922, 39.8549, 13.5230, 2.4579, 1.9090, 1.2321} // arbitrary; known by construction
	p := len(want)
	rng := rand.New(rand.NewPCG(17, 63))
	g := mat.NewDense(p, p, nil)
	for i := range p {
		for j := range p {
			g.Set(i, j, rng.NormFloat64())
		}
	}
	var qr mat.QR
	qr.Factorize(g)
	var q mat.Dense
	qr.QTo(&q)
	var a mat.Dense
	a.Mul(&q, mat.NewDiagDense(p, want))
	a.Mul(&a, q.T())
	sym := mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			sym.SetSym(i, j, (a.At(i, j)+a.At(j, i))/2)
		}
	}
	d, err := Decompose(sym)
	if err != nil {
		t.Fatal(err)
	}
	checkRelSlice(t, "eigenvalues", d.Values, want, 0, 1e-10)
	checkDecomposition(t, sym, d)
	// The constructed eigenvectors are the columns of Q, up to sign.
	for j := range p {
		checkRel(t, "|⟨v, q⟩|", math.Abs(mat.Dot(d.Vectors.ColView(j), q.ColView(j))), 1, 0, 1e-10)
	}
}

func TestDecomposeErrors(t *testing.T) {
	for _, a := range []mat.Symmetric{
		symOf([]float64{1, math.NaN()}, []float64{math.NaN(), 1}),
		symOf([]float64{math.Inf(1)}),
		&mat.SymDense{},
	} {
		if _, err := Decompose(a); err == nil {
			t.Errorf("Decompose(%v) succeeded", mat.Formatted(a))
		}
	}
}

// TestIris checks covariance PCA of Fisher's iris data, with the covariance
// accumulated by bands.Accumulator, against the explained-variance ratios
// printed by R's prcomp and in scikit-learn's documentation.
func TestIris(t *testing.T) {
	x := readIris(t)
	b := fit(t, Covariance, x, 4)
	want := []float64{0.924618723, 0.053066483, 0.017102610, 0.005212184} // R prcomp / scikit-learn PCA on iris
	// Shares are compared relative to their total, 1: the published values
	// are rounded to 9 decimals.
	checkRelSlice(t, "explained", Explained(b.Eigenvalues), want, 1, 1e-8)
	if k := ComponentsFor(b.Eigenvalues, 0.95); k != 2 {
		t.Errorf("ComponentsFor(0.95) = %d, want 2 (cumulative 0.9246, 0.9777)", k)
	}
	// Broken stick for p = 4: b₁ = 0.5208 < 0.9246 kept, b₂ = 0.2708 >
	// 0.0531 stops.
	if k := BrokenStick(b.Eigenvalues); k != 1 {
		t.Errorf("BrokenStick = %d, want 1", k)
	}
}

// TestSklearnExample uses the example of scikit-learn's PCA docstring,
// X = [[-1,-1],[-2,-1],[-3,-2],[1,1],[2,1],[3,2]].
func TestSklearnExample(t *testing.T) {
	x := []float64{-1, -1, -2, -1, -3, -2, 1, 1, 2, 1, 3, 2}
	b := fit(t, Covariance, x, 2)
	want := []float64{0.99244289, 0.00755711} // scikit-learn PCA docstring, explained_variance_ratio_
	checkRelSlice(t, "explained", Explained(b.Eigenvalues), want, 1, 1e-8)

	// Covariance [[5.6, 3.6], [3.6, 2.4]] (sums of products / 5), so
	// λ = 4 ± √15.52.
	checkRelSlice(t, "eigenvalues", b.Eigenvalues, []float64{4 + math.Sqrt(15.52), 4 - math.Sqrt(15.52)}, 0, 1e-14)

	pr, err := NewProjector(b, 1)
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, 6)
	xh := make([]float64, len(x))
	pr.Fold(y, x)
	pr.Unfold(xh, y)
	var sse float64
	for i := range x {
		sse += (x[i] - xh[i]) * (x[i] - xh[i])
	}
	// 5·λ₂ = 20 − 5√15.52 = 0.3022843964 (recomputed from the published
	// data, 10 significant digits).
	checkRel(t, "sum of squared errors", sse, 0.3022843964, 0, 1e-9)
}

func TestShares(t *testing.T) {
	for _, tc := range []struct {
		values          []float64
		explained, cumu []float64
	}{
		// Total 10: shares 6/10, 3/10, 0.5/10, 0.5/10.
		{[]float64{6, 3, 0.5, 0.5}, []float64{0.6, 0.3, 0.05, 0.05}, []float64{0.6, 0.9, 0.95, 1}},
		// Rank 2: the cumulative share reaches 1 at k = 2.
		{[]float64{3, 1, 0, 0}, []float64{0.75, 0.25, 0, 0}, []float64{0.75, 1, 1, 1}},
		// Zero total: all shares zero by definition.
		{[]float64{0, 0}, []float64{0, 0}, []float64{0, 0}},
		{nil, []float64{}, []float64{}},
	} {
		checkRelSlice(t, "Explained", Explained(tc.values), tc.explained, 1, 1e-15)
		checkRelSlice(t, "Cumulative", Cumulative(tc.values), tc.cumu, 1, 1e-15)
	}
	// The last cumulative share is exactly 1 whatever the rounding.
	v := []float64{0.1, 0.2, 0.3, 1e-17, 0.7}
	if c := Cumulative(v); c[len(c)-1] != 1 {
		t.Errorf("last cumulative share %v, want exactly 1", c[len(c)-1])
	}
}

func TestComponentsFor(t *testing.T) {
	v := []float64{6, 3, 0.5, 0.5} // cumulative 0.6, 0.9, 0.95, 1 (total 10)
	for _, tc := range []struct {
		values []float64
		frac   float64
		want   int
	}{
		{v, 0.5, 1},   // 0.6 ≥ 0.5
		{v, 0.6, 1},   // 6/10 = 0.6 exactly as a float64: boundary counts
		{v, 0.9, 2},   // 9/10 = 0.9 exactly: boundary counts
		{v, 0.91, 3},  // 0.9 < 0.91 ≤ 0.95
		{v, 0.95, 3},  // 9.5/10 = 0.95 exactly
		{v, 0.999, 4}, // only the full sum
		{v, 1, 4},
		{[]float64{3, 1, 0, 0}, 1, 2}, // rank 2: 4/4 = 1 at k = 2
		{[]float64{0, 0, 0}, 0.5, 3},  // zero total: never reached, all kept
		{[]float64{5}, math.SmallestNonzeroFloat64, 1}, // smallest valid fraction
	} {
		if got := ComponentsFor(tc.values, tc.frac); got != tc.want {
			t.Errorf("ComponentsFor(%v, %v) = %d, want %d", tc.values, tc.frac, got, tc.want)
		}
	}
	for _, f := range []float64{0, -0.1, 1.0000001, math.NaN(), math.Inf(1)} {
		if ValidateFraction(f) == nil {
			t.Errorf("ValidateFraction(%v) = nil", f)
		}
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("ComponentsFor(v, %v) did not panic", f)
				}
			}()
			ComponentsFor(v, f)
		}()
	}
}

func TestBrokenStick(t *testing.T) {
	// For p = 4 the broken-stick expectations are
	//   b₁ = (1 + 1/2 + 1/3 + 1/4)/4 = 25/48 ≈ 0.5208
	//   b₂ = (1/2 + 1/3 + 1/4)/4     = 13/48 ≈ 0.2708
	//   b₃ = (1/3 + 1/4)/4           =  7/48 ≈ 0.1458
	//   b₄ = (1/4)/4                 =  3/48 = 0.0625
	// and for p = 2: b₁ = 3/4, b₂ = 1/4.
	for _, tc := range []struct {
		values []float64
		want   int
	}{
		{[]float64{6, 3, 0.5, 0.5}, 2},  // 0.6 > 0.5208, 0.3 > 0.2708, 0.05 < 0.1458
		{[]float64{5, 3, 1, 1}, 0},      // 0.5 < 0.5208: not even the first
		{[]float64{7, 2, 0.8, 0.2}, 1},  // 0.7 > 0.5208, 0.2 < 0.2708
		{[]float64{13, 7, 2.5, 1.5}, 2}, // 13/24 = 0.5417 > 0.5208, 7/24 = 0.2917 > 0.2708, 2.5/24 = 0.1042 < 0.1458
		{[]float64{0.8, 0.2}, 1},        // 0.8 > 0.75, 0.2 < 0.25
		{[]float64{0.75, 0.25}, 0},      // 0.75 = b₁ is not greater
		{[]float64{1}, 0},               // p = 1: share 1 = b₁ is not greater
	} {
		if got := BrokenStick(tc.values); got != tc.want {
			t.Errorf("BrokenStick(%v) = %d, want %d", tc.values, got, tc.want)
		}
	}
}

func TestKaiserCount(t *testing.T) {
	for _, tc := range []struct {
		values []float64
		want   int
	}{
		{[]float64{2.9, 1.0000001, 1, 0.1}, 2}, // exactly 1 is not kept
		{[]float64{0.9, 0.1}, 0},
		{nil, 0},
	} {
		if got := KaiserCount(tc.values); got != tc.want {
			t.Errorf("KaiserCount(%v) = %d, want %d", tc.values, got, tc.want)
		}
	}
}
