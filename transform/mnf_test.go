package transform

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"bandfold/bands"
)

// lowRank returns the p×p covariance U diag(s) Uᵀ of a rank-r signal with
// a seeded random orthonormal U (from a QR factorisation in gonum) and
// the signal variances s.
func lowRank(seed uint64, p int, s []float64) (*mat.SymDense, *mat.Dense) {
	rng := rand.New(rand.NewPCG(seed, 5))
	g := mat.NewDense(p, len(s), nil)
	for i := range p {
		for j := range s {
			g.Set(i, j, rng.NormFloat64())
		}
	}
	var qr mat.QR
	qr.Factorize(g)
	var q mat.Dense
	qr.QTo(&q)
	u := mat.DenseCopyOf(q.Slice(0, p, 0, len(s)))
	cov := mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			var v float64
			for c, sc := range s {
				v += u.At(i, c) * sc * u.At(j, c)
			}
			cov.SetSym(i, j, v)
		}
	}
	return cov, u
}

func diagSym(d []float64) *mat.SymDense {
	m := mat.NewSymDense(len(d), nil)
	for i, v := range d {
		m.SetSym(i, i, v)
	}
	return m
}

// TestDecomposeMNFTruthByConstruction: with Σ = Σ_S + Σ_N, Σ_S of rank r
// and Σ_N = diag(σ²) known exactly, the generalised eigenvalues are
// 1 + the eigenvalues of Σ_N^(-1/2) Σ_S Σ_N^(-1/2) (Green et al. 1988, eq.
// 9): r of them, computed here independently with gonum's EigenSym, and
// exactly 1 for the other p − r components (SNR 0). The population matrices
// carry no sampling error, so the only error is rounding in a backward
// stable Cholesky and eigensolver, ~p·ε·κ ≈ 1e-13 for these matrices; 1e-10
// relative to λ₁ leaves a wide margin.
func TestDecomposeMNFTruthByConstruction(t *testing.T) {
	for _, tc := range []struct {
		name  string
		p     int
		sig   []float64
		noise func(j int) float64
	}{
		{"6 bands, rank 2, unequal noise", 6, []float64{400, 90}, func(j int) float64 { return 0.5 + float64(j) }},
		{"40 bands, rank 3, a few noisy bands", 40, []float64{1e4, 2e3, 300}, func(j int) float64 {
			if j%13 == 5 {
				return 50
			}
			return 1
		}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p, r := tc.p, len(tc.sig)
			sigS, _ := lowRank(11, p, tc.sig)
			nv := make([]float64, p)
			for j := range nv {
				nv[j] = tc.noise(j)
			}
			noise := diagSym(nv)
			var cov mat.SymDense
			cov.AddSym(sigS, noise)
			d, err := DecomposeMNF(&cov, noise)
			if err != nil {
				t.Fatal(err)
			}
			// Independent reference: eigenvalues of the noise-whitened signal.
			white := mat.NewSymDense(p, nil)
			for i := range p {
				for j := i; j < p; j++ {
					white.SetSym(i, j, sigS.At(i, j)/math.Sqrt(nv[i]*nv[j]))
				}
			}
			var eig mat.EigenSym
			if !eig.Factorize(white, false) {
				t.Fatal("EigenSym failed")
			}
			asc := eig.Values(nil)
			for k := range p {
				want := 1 + math.Max(asc[p-1-k], 0)
				if k >= r {
					want = 1 // known by construction: no signal beyond rank r
				}
				checkRel(t, "lambda", d.Values[k], want, d.Values[0], 1e-10)
			}
			checkMNFProperties(t, &cov, noise, d, 1e-10)
		})
	}
}

// checkMNFProperties checks Aᵀ Σ_N A = I and Aᵀ Σ A = diag(λ) to tol
// relative (to 1 and to λ₁), the defining normalisation of Green et al.
// (1988) and of DecomposeMNF.
func checkMNFProperties(t *testing.T, cov, noise mat.Symmetric, d Decomposition, tol float64) {
	t.Helper()
	p := cov.SymmetricDim()
	var an, ana, as, asa mat.Dense
	an.Mul(noise, d.Vectors)
	ana.Mul(d.Vectors.T(), &an)
	as.Mul(cov, d.Vectors)
	asa.Mul(d.Vectors.T(), &as)
	for i := range p {
		for j := range p {
			want, wantS := 0.0, 0.0
			if i == j {
				want, wantS = 1, d.Values[i]
			}
			if e := math.Abs(ana.At(i, j) - want); e > tol {
				t.Errorf("(AᵀΣ_N A)[%d][%d] = %v, want %v", i, j, ana.At(i, j), want)
			}
			if e := math.Abs(asa.At(i, j) - wantS); e > tol*d.Values[0] {
				t.Errorf("(AᵀΣA)[%d][%d] = %v, want %v", i, j, asa.At(i, j), wantS)
			}
		}
	}
}

// TestDecomposeMNFNotDefinite: a band without noise makes Σ_N singular;
// the error names it.
func TestDecomposeMNFNotDefinite(t *testing.T) {
	cov := diagSym([]float64{5, 4, 3})
	for _, tc := range []struct {
		noise []float64
		band  int
	}{{[]float64{1, 0, 1}, 1}, {[]float64{0, 1, 1}, 0}, {[]float64{1, 1, -1}, 2}} {
		_, err := DecomposeMNF(cov, diagSym(tc.noise))
		var nd *NotDefiniteError
		if !errors.As(err, &nd) || nd.Band != tc.band {
			t.Errorf("noise %v: %v, want NotDefiniteError at band %d", tc.noise, err, tc.band)
		}
	}
}

// sampledCube draws n pixels of a rank-r signal plus independent noise of
// per-band variances nv; it returns the noisy and the clean pixels.
func sampledCube(seed uint64, n int, u *mat.Dense, sig, nv []float64) (noisy, clean []float64) {
	rng := rand.New(rand.NewPCG(seed, 9))
	p, r := u.RawMatrix().Rows, len(sig)
	noisy, clean = make([]float64, n*p), make([]float64, n*p)
	z := make([]float64, r)
	for i := range n {
		for c := range r {
			z[c] = math.Sqrt(sig[c]) * rng.NormFloat64()
		}
		for j := range p {
			v := 100 + float64(j)
			for c := range r {
				v += u.At(j, c) * z[c]
			}
			clean[i*p+j] = v
			noisy[i*p+j] = v + math.Sqrt(nv[j])*rng.NormFloat64()
		}
	}
	return noisy, clean
}

// TestMNFDenoisesBetterThanPCA: on a rank-r signal with noise variances
// that differ across bands, unfolding k = r MNF components comes closer to
// the clean signal than unfolding k = r principal components (Green et al.
// 1988, section IV: principal components mix noisy bands into the leading
// components). Both fits use the sampled covariance; MNF uses the known
// diagonal noise covariance. The fitted basis satisfies the MNF
// normalisation to 1e-10 (see TestDecomposeMNFTruthByConstruction), and a
// fold/unfold with all p components returns the pixels (A⁻ᵀ = Σ_N A) to
// 1e-9 relative to the data's scale.
func TestMNFDenoisesBetterThanPCA(t *testing.T) {
	const p, n = 30, 20000
	sig := []float64{900, 400, 100}
	_, u := lowRank(4, p, sig)
	nv := make([]float64, p)
	for j := range nv {
		nv[j] = 0.2
		if j%5 == 0 {
			nv[j] = 60 // a few much noisier bands
		}
	}
	noisy, clean := sampledCube(8, n, u, sig, nv)
	acc := bands.NewAccumulator(p)
	acc.AddPixels(noisy, nil)
	bs := testBands(p)
	lo, hi := acc.Min(nil), acc.Max(nil)
	for j := range bs {
		bs[j].Min, bs[j].Max = lo[j], hi[j]
	}
	mnf, err := NewMNFBasis(bs, n, acc.Mean(nil), acc.Covariance(nil), diagSym(nv), n)
	if err != nil {
		t.Fatal(err)
	}
	pca := fit(t, Covariance, noisy, p)
	rmse := func(b *Basis, k int) float64 {
		pr, err := NewProjector(b, k)
		if err != nil {
			t.Fatal(err)
		}
		y, xh := make([]float64, n*k), make([]float64, n*p)
		pr.Fold(y, noisy)
		pr.Unfold(xh, y)
		var s float64
		for i, v := range xh {
			s += (v - clean[i]) * (v - clean[i])
		}
		return math.Sqrt(s / float64(n*p))
	}
	r := len(sig)
	em, ep := rmse(mnf, r), rmse(pca, r)
	t.Logf("RMSE against the clean signal, k = %d: MNF %.4f, PCA %.4f", r, em, ep)
	if !(em < ep) {
		t.Errorf("MNF RMSE %v not below PCA RMSE %v", em, ep)
	}
	// All p components: the inverse is exact.
	pr, _ := NewProjector(mnf, p)
	y, xh := make([]float64, n*p), make([]float64, n*p)
	pr.Fold(y[:p*100], noisy[:p*100])
	pr.Unfold(xh[:p*100], y[:p*100])
	for i := range p * 100 {
		checkRel(t, "full unfold", xh[i], noisy[i], 100, 1e-9)
	}
	// The file round trip keeps the basis valid and the SNRs beyond r near
	// 0: with n pixels each sampled eigenvalue of a pure-noise direction
	// deviates from 1 by O(√(p/n)) ≈ 0.04 (Marchenko–Pastur edge
	// (1+√(p/n))² − 1 ≈ 0.08); 0.15 is about twice that edge.
	data, err := mnf.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	back, err := parseBasis(data)
	if err != nil {
		t.Fatal(err)
	}
	for k, s := range SNR(back.Eigenvalues)[r:] {
		if math.Abs(s) > 0.15 {
			t.Errorf("component %d: SNR %v, want near 0 (no signal beyond rank %d by construction)", k+r+1, s, r)
		}
	}
	if ComponentsForSNR(back.Eigenvalues, 1) != r {
		t.Errorf("ComponentsForSNR(1) = %d, want %d (constructed rank; signal SNRs are ≥ 100/60)", ComponentsForSNR(back.Eigenvalues, 1), r)
	}
}
