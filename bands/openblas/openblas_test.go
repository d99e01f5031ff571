//go:build cgo

package openblas

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// tol is the largest relative difference, in the Frobenius norm, allowed
// between OpenBLAS and gonum's native routines: both compute the same sums in
// different orders, so they agree to a small multiple of the unit roundoff
// times the inner dimension.
const tol = 1e-12

// relDiff returns ‖got − want‖_F / ‖want‖_F over the elements selected by in,
// which takes a row and column index. If want is zero there it returns
// ‖got‖_F, so that a non-zero result still fails.
func relDiff(got, want []float64, rows, cols, ld int, in func(i, j int) bool) float64 {
	var num, den float64
	for i := range rows {
		for j := range cols {
			if !in(i, j) {
				continue
			}
			d := got[i*ld+j] - want[i*ld+j]
			num += d * d
			den += want[i*ld+j] * want[i*ld+j]
		}
	}
	if den == 0 {
		return math.Sqrt(num)
	}
	return math.Sqrt(num / den)
}

func random(rnd *rand.Rand, n int) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = 2*rnd.Float64() - 1
	}
	return s
}

func TestUseSetsOneThread(t *testing.T) {
	Use()
	// Known by construction: Use sets the thread count to one.
	if got := threads(); got != 1 {
		t.Errorf("openblas_get_num_threads() = %d after Use, want 1", got)
	}
	if _, ok := blas64.Implementation().(implementation); !ok {
		t.Errorf("blas64.Implementation() is %T after Use, want implementation", blas64.Implementation())
	}
	if Config() == "" {
		t.Error("Config() is empty")
	}
}

func TestDsyrk(t *testing.T) {
	rnd := rand.New(rand.NewPCG(1, 2))
	for _, tc := range []struct {
		n, k, pad   int
		alpha, beta float64
	}{
		{n: 1, k: 1, alpha: 1},
		{n: 5, k: 3, alpha: 1},
		{n: 6, k: 9, alpha: 0, beta: 2},
		{n: 7, k: 100, alpha: 1, beta: 0},
		{n: 30, k: 17, pad: 3, alpha: 0.5, beta: 2},
		{n: 64, k: 500, alpha: -1.5, beta: 1},
		{n: 224, k: 300, pad: 1, alpha: 1, beta: 0.25},
	} {
		for _, ul := range []blas.Uplo{blas.Upper, blas.Lower} {
			for _, tA := range []blas.Transpose{blas.NoTrans, blas.Trans, blas.ConjTrans} {
				name := fmt.Sprintf("n=%d,k=%d,pad=%d,%c,%c", tc.n, tc.k, tc.pad, ul, tA)
				t.Run(name, func(t *testing.T) {
					row, col := tc.n, tc.k
					if tA != blas.NoTrans {
						row, col = tc.k, tc.n
					}
					lda, ldc := col+tc.pad, tc.n+tc.pad
					a := random(rnd, row*lda)
					want := random(rnd, tc.n*ldc)
					got := append([]float64(nil), want...)
					native.Dsyrk(ul, tA, tc.n, tc.k, tc.alpha, a, lda, tc.beta, want, ldc)
					implementation{}.Dsyrk(ul, tA, tc.n, tc.k, tc.alpha, a, lda, tc.beta, got, ldc)
					tri := func(i, j int) bool { return j < tc.n && (ul == blas.Upper) == (j >= i) || i == j }
					// Expected: gonum's native Dsyrk (reference implementation).
					if d := relDiff(got, want, tc.n, tc.n, ldc, tri); d > tol {
						t.Errorf("relative difference from native Dsyrk = %g, want <= %g", d, tol)
					}
					// Known by construction: the other triangle and the
					// padding are not referenced and stay untouched.
					for i := range got {
						r, c := i/ldc, i%ldc
						if !tri(r, c) && got[i] != want[i] {
							t.Fatalf("element (%d, %d) outside the triangle changed", r, c)
						}
					}
				})
			}
		}
	}
}

func TestDgemm(t *testing.T) {
	rnd := rand.New(rand.NewPCG(3, 4))
	for _, tc := range []struct {
		m, n, k, pad int
		alpha, beta  float64
	}{
		{m: 1, n: 1, k: 1, alpha: 1},
		{m: 3, n: 5, k: 2, alpha: 1},
		{m: 17, n: 4, k: 33, pad: 2, alpha: -0.5, beta: 1},
		{m: 64, n: 64, k: 64, alpha: 1, beta: 0},
		{m: 100, n: 224, k: 50, pad: 5, alpha: 2, beta: -3},
	} {
		for _, tA := range []blas.Transpose{blas.NoTrans, blas.Trans} {
			for _, tB := range []blas.Transpose{blas.NoTrans, blas.Trans, blas.ConjTrans} {
				name := fmt.Sprintf("m=%d,n=%d,k=%d,pad=%d,%c%c", tc.m, tc.n, tc.k, tc.pad, tA, tB)
				t.Run(name, func(t *testing.T) {
					ra, ca := tc.m, tc.k
					if tA != blas.NoTrans {
						ra, ca = tc.k, tc.m
					}
					rb, cb := tc.k, tc.n
					if tB != blas.NoTrans {
						rb, cb = tc.n, tc.k
					}
					lda, ldb, ldc := ca+tc.pad, cb+tc.pad, tc.n+tc.pad
					a, b := random(rnd, ra*lda), random(rnd, rb*ldb)
					want := random(rnd, tc.m*ldc)
					got := append([]float64(nil), want...)
					native.Dgemm(tA, tB, tc.m, tc.n, tc.k, tc.alpha, a, lda, b, ldb, tc.beta, want, ldc)
					implementation{}.Dgemm(tA, tB, tc.m, tc.n, tc.k, tc.alpha, a, lda, b, ldb, tc.beta, got, ldc)
					all := func(i, j int) bool { return j < tc.n }
					// Expected: gonum's native Dgemm (reference implementation).
					if d := relDiff(got, want, tc.m, ldc, ldc, all); d > tol {
						t.Errorf("relative difference from native Dgemm = %g, want <= %g", d, tol)
					}
				})
			}
		}
	}
}

// TestPanics checks that invalid arguments give the same panic as gonum's
// native implementation, and that quick returns behave the same.
func TestPanics(t *testing.T) {
	a := make([]float64, 12)
	for _, tc := range []struct {
		name string
		call func(blas.Float64)
	}{
		{"syrk bad uplo", func(b blas.Float64) { b.Dsyrk('X', blas.NoTrans, 3, 4, 1, a, 4, 0, a[:9], 3) }},
		{"syrk bad trans", func(b blas.Float64) { b.Dsyrk(blas.Upper, 'X', 3, 4, 1, a, 4, 0, a[:9], 3) }},
		{"syrk n<0", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, -1, 4, 1, a, 4, 0, a[:9], 3) }},
		{"syrk k<0", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, 3, -1, 1, a, 4, 0, a[:9], 3) }},
		{"syrk bad lda", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, 3, 4, 1, a, 3, 0, a[:9], 3) }},
		{"syrk bad ldc", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, 3, 4, 1, a, 4, 0, a[:9], 2) }},
		{"syrk short a", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, 3, 4, 1, a[:11], 4, 0, a[:9], 3) }},
		{"syrk short c", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, 3, 4, 1, a, 4, 0, a[:8], 3) }},
		{"syrk n=0", func(b blas.Float64) { b.Dsyrk(blas.Upper, blas.NoTrans, 0, 4, 1, nil, 4, 0, nil, 1) }},
		{"gemm bad transA", func(b blas.Float64) { b.Dgemm('X', blas.NoTrans, 3, 3, 4, 1, a, 4, a, 3, 0, a[:9], 3) }},
		{"gemm bad transB", func(b blas.Float64) { b.Dgemm(blas.NoTrans, 'X', 3, 3, 4, 1, a, 4, a, 3, 0, a[:9], 3) }},
		{"gemm m<0", func(b blas.Float64) { b.Dgemm(blas.NoTrans, blas.NoTrans, -1, 3, 4, 1, a, 4, a, 3, 0, a[:9], 3) }},
		{"gemm bad ldb", func(b blas.Float64) { b.Dgemm(blas.NoTrans, blas.NoTrans, 3, 3, 4, 1, a, 4, a, 2, 0, a[:9], 3) }},
		{"gemm short b", func(b blas.Float64) { b.Dgemm(blas.NoTrans, blas.NoTrans, 3, 3, 4, 1, a, 4, a[:11], 3, 0, a[:9], 3) }},
		{"gemm m=0", func(b blas.Float64) { b.Dgemm(blas.NoTrans, blas.NoTrans, 0, 3, 4, 1, nil, 4, a, 3, 0, nil, 3) }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			// Expected: whatever gonum's native implementation does.
			want := recovered(func() { tc.call(native) })
			got := recovered(func() { tc.call(implementation{}) })
			if got != want {
				t.Errorf("panic = %v, want %v", got, want)
			}
		})
	}
}

func recovered(f func()) (r any) {
	defer func() { r = recover() }()
	f()
	return nil
}

// TestConcurrent runs Dsyrk from several goroutines at once, as bandfold's
// workers do, and checks every result against a serial one.
func TestConcurrent(t *testing.T) {
	Use()
	const n, k, workers = 96, 400, 4
	rnd := rand.New(rand.NewPCG(5, 6))
	a := random(rnd, k*n)
	want := make([]float64, n*n)
	native.Dsyrk(blas.Upper, blas.Trans, n, k, 1, a, n, 0, want, n)
	var wg sync.WaitGroup
	got := make([][]float64, workers)
	for w := range got {
		got[w] = make([]float64, n*n)
		wg.Go(func() {
			for range 20 {
				implementation{}.Dsyrk(blas.Upper, blas.Trans, n, k, 1, a, n, 0, got[w], n)
			}
		})
	}
	wg.Wait()
	upper := func(i, j int) bool { return j >= i }
	for w, g := range got {
		// Expected: gonum's native Dsyrk (reference implementation).
		if d := relDiff(g, want, n, n, n, upper); d > tol {
			t.Errorf("worker %d: relative difference from native = %g", w, d)
		}
	}
}

// BenchmarkSyrk compares native and OpenBLAS Dsyrk on the shape of one
// AddPixels chunk of a hyperspectral tile: Cᵀ·C for a 4096×224 centred block.
func BenchmarkSyrk(b *testing.B) {
	Use()
	const n, p = 4096, 224
	a := random(rand.New(rand.NewPCG(7, 8)), n*p)
	c := make([]float64, p*p)
	for _, impl := range []struct {
		name string
		blas.Float64
	}{{"native", native}, {"openblas", implementation{}}} {
		b.Run(fmt.Sprintf("n=%d,p=%d/%s", n, p, impl.name), func(b *testing.B) {
			for b.Loop() {
				impl.Dsyrk(blas.Upper, blas.Trans, p, n, 1, a, p, 0, c, p)
			}
			flops := float64(n) * p * (p + 1)
			b.ReportMetric(flops*float64(b.N)/float64(b.Elapsed().Nanoseconds()), "GFLOP/s")
		})
	}
}
