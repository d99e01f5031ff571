package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Method is how a basis orders its components.
type Method string

const (
	// PCA orders components by variance: the eigenvectors of the
	// covariance (or correlation) matrix.
	PCA Method = "pca"
	// MNF orders components by signal-to-noise ratio: the minimum noise
	// fraction transform of Green, Berman, Switzer & Craig (1988, IEEE
	// TGRS 26(1):65-74), equivalently the noise-adjusted principal
	// components of Lee, Woodyatt & Berman (1990, IEEE TGRS 28(3):295-304).
	MNF Method = "mnf"
)

// ParseMethod parses "pca" or "mnf".
func ParseMethod(s string) (Method, error) {
	switch m := Method(s); m {
	case PCA, MNF:
		return m, nil
	}
	return "", fmt.Errorf("unknown method %q (want %q or %q)", s, PCA, MNF)
}

// NotDefiniteError reports a noise covariance that is not positive
// definite; Band is the 0-based band at which the Cholesky factorisation of
// its leading submatrices first fails.
type NotDefiniteError struct{ Band int }

func (e *NotDefiniteError) Error() string {
	return fmt.Sprintf("the noise covariance is not positive definite at band %d", e.Band+1)
}

// DecomposeMNF solves the symmetric-definite generalised eigenproblem
//
//	Σ a = λ Σ_N a
//
// of the band covariance cov (Σ) and the noise covariance noise (Σ_N), as
// Green et al. (1988) define the minimum noise fraction transform: with the
// Cholesky factor Σ_N = L Lᵀ (gonum's mat.Cholesky), the eigenvectors v of
// the symmetric matrix L⁻¹ Σ L⁻ᵀ (mat.EigenSym through Decompose) give
// a = L⁻ᵀ v. The eigenvalues are returned in descending order; each column
// a of Vectors is scaled so that aᵀ Σ_N a = 1, so that Aᵀ Σ_N A = I,
// Aᵀ Σ A = diag(λ) and λ − 1 is the component's signal-to-noise ratio when
// Σ = Σ_S + Σ_N. The sign of each column follows the rule of Decompose: its
// largest-magnitude loading is positive.
//
// It returns a *NotDefiniteError when Σ_N is not positive definite (a
// constant band, or a band without noise), and other errors for shapes that
// disagree or non-finite values.
func DecomposeMNF(cov, noise mat.Symmetric) (Decomposition, error) {
	p := cov.SymmetricDim()
	if noise.SymmetricDim() != p {
		return Decomposition{}, fmt.Errorf("%d×%d noise covariance for %d bands", noise.SymmetricDim(), noise.SymmetricDim(), p)
	}
	var chol mat.Cholesky
	if !chol.Factorize(noise) {
		return Decomposition{}, &NotDefiniteError{Band: firstIndefinite(noise)}
	}
	var l mat.TriDense
	chol.LTo(&l)
	// W = L⁻¹ Σ, then M = L⁻¹ Wᵀ = L⁻¹ Σ L⁻ᵀ, by triangular solves.
	var w, m mat.Dense
	if err := w.Solve(&l, cov); err != nil {
		return Decomposition{}, fmt.Errorf("noise covariance: %w", err)
	}
	if err := m.Solve(&l, w.T()); err != nil {
		return Decomposition{}, fmt.Errorf("noise covariance: %w", err)
	}
	sym := mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			sym.SetSym(i, j, (m.At(i, j)+m.At(j, i))/2)
		}
	}
	d, err := Decompose(sym)
	if err != nil {
		return Decomposition{}, err
	}
	// A = L⁻ᵀ V: solve Lᵀ A = V.
	var a mat.Dense
	if err := a.Solve(l.T(), d.Vectors); err != nil {
		return Decomposition{}, fmt.Errorf("noise covariance: %w", err)
	}
	col := make([]float64, p)
	for j := range p {
		mat.Col(col, j, &a)
		orient(col)
		a.SetCol(j, col)
	}
	return Decomposition{Values: d.Values, Vectors: &a}, nil
}

// firstIndefinite returns the first band k at which the leading
// (k+1)×(k+1) submatrix of s is not positive definite (p−1 if none is
// found, which rounding can cause).
func firstIndefinite(s mat.Symmetric) int {
	p := s.SymmetricDim()
	for k := range p {
		if !(s.At(k, k) > 0) {
			return k
		}
		sub := mat.NewSymDense(k+1, nil)
		for i := 0; i <= k; i++ {
			for j := i; j <= k; j++ {
				sub.SetSym(i, j, s.At(i, j))
			}
		}
		var c mat.Cholesky
		if !c.Factorize(sub) {
			return k
		}
	}
	return p - 1
}

// SNR returns the signal-to-noise ratios λ − 1 of MNF eigenvalues.
func SNR(values []float64) []float64 {
	out := make([]float64, len(values))
	for i, v := range values {
		out[i] = v - 1
	}
	return out
}

// ComponentsForSNR returns the number of leading MNF components whose
// signal-to-noise ratio λ − 1 is at least minSNR (eigenvalues descend, so
// they are the first ones), at least 1.
func ComponentsForSNR(values []float64, minSNR float64) int {
	k := 0
	for _, v := range values {
		if !(v-1 >= minSNR) {
			break
		}
		k++
	}
	return max(k, 1)
}

// checkMNF checks the eigenpairs of an MNF basis: with A the stored vectors
// by column, Aᵀ Σ_N A = I and Aᵀ Σ A = diag(λ), each to eigenTol relative
// (against 1, and against max(λ₁, max_j Σ_jj / Σ_N,jj)). See eigenTol for
// why rounding stays far inside it.
func (b *Basis) checkMNF() error {
	p := len(b.Bands)
	if err := checkMatrix("noise_covariance", b.NoiseCovariance, p); err != nil {
		return err
	}
	cov, noise := mat.NewSymDense(p, nil), mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			if b.NoiseCovariance[i][j] != b.NoiseCovariance[j][i] {
				return fmt.Errorf("noise_covariance is not symmetric at [%d][%d]", i, j)
			}
			cov.SetSym(i, j, b.Covariance[i][j])
			noise.SetSym(i, j, b.NoiseCovariance[i][j])
		}
	}
	a := mat.NewDense(p, p, nil)
	for i, row := range b.Eigenvectors {
		a.SetCol(i, row)
	}
	var an, as, ana, asa mat.Dense
	an.Mul(noise, a)
	ana.Mul(a.T(), &an)
	as.Mul(cov, a)
	asa.Mul(a.T(), &as)
	scale := b.Eigenvalues[0]
	for j := range p {
		if nj := noise.At(j, j); nj > 0 {
			scale = max(scale, cov.At(j, j)/nj)
		}
	}
	for i := range p {
		for j := range p {
			want, wantS := 0.0, 0.0
			if i == j {
				want, wantS = 1, b.Eigenvalues[i]
			}
			if d := math.Abs(ana.At(i, j) - want); !(d <= eigenTol) {
				return fmt.Errorf("eigenvectors %d and %d are not noise-orthonormal: aᵀ Σ_N a = %g", i, j, ana.At(i, j))
			}
			if d := math.Abs(asa.At(i, j) - wantS); !(d <= eigenTol*scale) {
				return fmt.Errorf("eigenvectors[%d] and eigenvalues[%d] = %g are not a generalised eigenpair: aᵀ Σ a = %g", i, j, b.Eigenvalues[i], asa.At(i, j))
			}
		}
	}
	return nil
}

// errNeedsNoise is returned by v2 checks for an MNF basis without a noise
// covariance.
var errNeedsNoise = errors.New("method mnf without a noise_covariance")
