package change

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestBandScorer: Z and the top component from band differences equal the
// Scorer's on A·dx (the identity y = L⁻¹(A·dx − m) = L⁻¹A·dx − L⁻¹m, known by
// construction), to rounding, for random maps, models and pixels.
func TestBandScorer(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, dims := range [][2]int{{1, 1}, {3, 7}, {6, 7}, {4, 20}} {
		k, p := dims[0], dims[1]
		a := make([]float64, k*p)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		loc := make([]float64, k)
		for i := range loc {
			loc[i] = rng.NormFloat64()
		}
		r := mat.NewDense(k, k, nil)
		for i := range k {
			for j := range k {
				r.Set(i, j, rng.NormFloat64())
			}
		}
		cov := mat.NewSymDense(k, nil)
		cov.SymOuterK(1, r)
		for i := range k {
			cov.SetSym(i, i, cov.At(i, i)+0.5)
		}
		m, err := NewModel(loc, cov)
		if err != nil {
			t.Fatal(err)
		}
		bs, sc := m.BandScorer(a), m.Scorer()
		dx, d := make([]float64, p), make([]float64, k)
		for range 1000 {
			for j := range dx {
				dx[j] = 3 * rng.NormFloat64()
			}
			for i := range d {
				d[i] = 0
				for j := range dx {
					d[i] += a[i*p+j] * dx[j]
				}
			}
			z, top := bs.ZTop(dx)
			wz, wtop := sc.ZTop(d)
			if math.Abs(z-wz) > 1e-9*math.Max(1, wz) {
				t.Fatalf("k %d, p %d: Z %v, want %v", k, p, z, wz)
			}
			if top != wtop && math.Abs(z-wz) > 0 {
				y := whitened(sc, d)
				if math.Abs(y[top]*y[top]-y[wtop]*y[wtop]) > 1e-9*wz {
					t.Fatalf("k %d, p %d: top %d, want %d (contributions %v)", k, p, top, wtop, y)
				}
			}
		}
	}
}

// whitened returns L⁻¹(d − m).
func whitened(sc *Scorer, d []float64) []float64 {
	sc.whiten(d, false)
	return append([]float64(nil), sc.y...)
}

func BenchmarkBandScorer(b *testing.B) {
	const k, p = 6, 7
	loc := make([]float64, k)
	cov := mat.NewSymDense(k, nil)
	a := make([]float64, k*p)
	for i := range k {
		cov.SetSym(i, i, 1)
		a[i*p+i] = 1
	}
	m, err := NewModel(loc, cov)
	if err != nil {
		b.Fatal(err)
	}
	bs := m.BandScorer(a)
	dx := make([]float64, 1024*p)
	for i := range dx {
		dx[i] = float64(i % 13)
	}
	var sink float64
	for b.Loop() {
		for i := 0; i < len(dx); i += p {
			z, _ := bs.ZTop(dx[i : i+p])
			sink += z
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*1024), "ns/pixel")
}
