package change

import "fmt"

// BandScorer computes the change statistic of single pixels straight from
// their band differences dx, for a Model of the differences d = A·dx that a
// linear map A (k×p) makes of them, such as the projection of band
// differences onto k principal components. It folds A into the whitening:
//
//	y = L⁻¹(A·dx − m) = B·dx − c,  B = L⁻¹A,  c = L⁻¹m,
//
// so a pixel costs one k×p product and no triangular solve, and Z = |y|² and
// the top component are those of Scorer.ZTop(A·dx) up to rounding. Like a
// Scorer it holds no scratch shared with others, but it is read-only, so it
// is safe for concurrent use.
type BandScorer struct {
	k, p int
	b    []float64 // B, row-major k×p
	c    []float64
}

// BandScorer returns the scorer of band differences for the map a (k×p,
// row-major: component i of A·dx is Σ_j a[i·p+j]·dx[j]). It panics if len(a)
// is not k·p for some p ≥ 1.
func (m *Model) BandScorer(a []float64) *BandScorer {
	k := m.k
	if len(a) == 0 || len(a)%k != 0 {
		panic(fmt.Sprintf("change: a map of %d values for k = %d components", len(a), k))
	}
	p := len(a) / k
	s := &BandScorer{k: k, p: p, b: make([]float64, k*p), c: make([]float64, k)}
	col, y := make([]float64, k), make([]float64, k)
	for j := range p {
		for i := range k {
			col[i] = a[i*p+j]
		}
		m.solveLower(y, col)
		for i := range k {
			s.b[i*p+j] = y[i]
		}
	}
	m.solveLower(s.c, m.loc)
	return s
}

// solveLower sets y to L⁻¹v by forward substitution.
func (m *Model) solveLower(y, v []float64) {
	k := m.k
	for i := range k {
		t := v[i]
		for j, lij := range m.l[i*k : i*k+i] {
			t -= lij * y[j]
		}
		y[i] = t * m.inv[i]
	}
}

// ZTop returns Z for the band differences dx and the component contributing
// most to it, as Scorer.ZTop does for A·dx. It panics if len(dx) != p.
//
// Rows of B are taken four at a time (then two, then one) with separate
// sums, so that the additions of one row do not wait for those of another.
func (s *BandScorer) ZTop(dx []float64) (z float64, top int) {
	p, k := s.p, s.k
	if len(dx) != p {
		panic(fmt.Sprintf("change: %d band differences for a map of %d bands", len(dx), p))
	}
	var acc zTop
	i := 0
	for ; i+4 <= k; i += 4 {
		b0, b1, b2, b3 := s.b[i*p:i*p+p], s.b[(i+1)*p:(i+1)*p+p], s.b[(i+2)*p:(i+2)*p+p], s.b[(i+3)*p:(i+3)*p+p]
		b0, b1, b2, b3 = b0[:len(dx)], b1[:len(dx)], b2[:len(dx)], b3[:len(dx)] // no bounds checks below
		v0, v1, v2, v3 := -s.c[i], -s.c[i+1], -s.c[i+2], -s.c[i+3]
		for j, x := range dx {
			v0 += b0[j] * x
			v1 += b1[j] * x
			v2 += b2[j] * x
			v3 += b3[j] * x
		}
		acc.add(v0, i)
		acc.add(v1, i+1)
		acc.add(v2, i+2)
		acc.add(v3, i+3)
	}
	for ; i+2 <= k; i += 2 {
		b0, b1 := s.b[i*p:i*p+p], s.b[(i+1)*p:(i+1)*p+p]
		b0, b1 = b0[:len(dx)], b1[:len(dx)]
		v0, v1 := -s.c[i], -s.c[i+1]
		for j, x := range dx {
			v0 += b0[j] * x
			v1 += b1[j] * x
		}
		acc.add(v0, i)
		acc.add(v1, i+1)
	}
	for ; i < k; i++ {
		v0 := -s.c[i]
		for j, b := range s.b[i*p : i*p+p] {
			v0 += b * dx[j]
		}
		acc.add(v0, i)
	}
	return acc.z, acc.top
}

// zTop sums the squared whitened coordinates and keeps the largest's index
// (the lowest on ties).
type zTop struct {
	z, best float64
	top     int
}

func (t *zTop) add(v float64, i int) {
	v2 := v * v
	t.z += v2
	if v2 > t.best {
		t.best, t.top = v2, i
	}
}
