package bands

import (
	"fmt"
	"math"
)

// Moments accumulates per-band count, mean and sum of squared deviations
// only: the diagonal of an Accumulator's co-moment matrix, at O(p) cost per
// pixel instead of O(p²). Use it where only band variances are needed, such
// as the total variance of a scene (the trace of its covariance).
//
// Each AddPixels call takes the block's own mean first, then its centred
// squares, and folds the block into the running state with the pairwise
// formula of Chan, Golub & LeVeque (1979), as Accumulator does.
type Moments struct {
	p    int
	n    float64
	mean []float64
	m2   []float64
	// scratch for one block
	bmean, bm2 []float64
}

// NewMoments returns empty per-band moments for p bands.
func NewMoments(p int) *Moments {
	if p <= 0 {
		panic(fmt.Sprintf("bands: NewMoments with %d bands", p))
	}
	return &Moments{p: p, mean: make([]float64, p), m2: make([]float64, p),
		bmean: make([]float64, p), bm2: make([]float64, p)}
}

// Count returns the number of pixels added.
func (m *Moments) Count() float64 { return m.n }

// Reset empties m.
func (m *Moments) Reset() {
	m.n = 0
	fill(m.mean, 0)
	fill(m.m2, 0)
}

// AddPixels adds the pixels of x (pixel-major, p values per pixel) whose
// valid flag is set; valid may be nil when every pixel is valid. The pixels
// are taken in chunks small enough to stay in cache, each reduced in two
// passes (mean, then centred squares) and merged.
func (m *Moments) AddPixels(x []float64, valid []bool) {
	p := m.p
	if len(x)%p != 0 || (valid != nil && len(valid) != len(x)/p) {
		panic(fmt.Sprintf("bands: %d values and %d flags for %d bands", len(x), len(valid), p))
	}
	n := len(x) / p
	for start := 0; start < n; start += fusedChunk {
		end := min(n, start+fusedChunk)
		var v []bool
		if valid != nil {
			v = valid[start:end]
		}
		m.addChunk(x[start*p:end*p], v)
	}
}

func (m *Moments) addChunk(x []float64, valid []bool) {
	p := m.p
	// The block's sums in locals, so that the loops below need not reload
	// m's slices after every addition: 14-16% faster
	// (BenchmarkMomentsAddPixels); each band's sums still run in pixel
	// order, so the moments are the same bit for bit.
	sum, sq := m.bmean[:p], m.bm2[:p:p]
	fill(sum, 0)
	fill(sq, 0)
	nb := 0.0
	for i := 0; i < len(x)/p; i++ {
		if valid == nil || valid[i] {
			nb++
			px := x[i*p : i*p+p]
			px = px[:len(sum)]
			for b, v := range px {
				sum[b] += v
			}
		}
	}
	if nb == 0 {
		return
	}
	for b := range sum {
		sum[b] /= nb
	}
	for i := 0; i < len(x)/p; i++ {
		if valid == nil || valid[i] {
			px := x[i*p : i*p+p]
			px = px[:len(sum)]
			for b, v := range px {
				d := v - sum[b]
				sq[b] += d * d
			}
		}
	}
	m.fold(nb, sum, sq)
}

// Merge folds o into m (Chan et al. 1979, diagonal terms).
func (m *Moments) Merge(o *Moments) {
	if o.p != m.p {
		panic(fmt.Sprintf("bands: merging moments of %d bands into %d", o.p, m.p))
	}
	if o.n > 0 {
		m.fold(o.n, o.mean, o.m2)
	}
}

func (m *Moments) fold(nb float64, mb, m2b []float64) {
	na := m.n
	n := na + nb
	for b := range m.mean {
		d := mb[b] - m.mean[b]
		m.mean[b] += d * nb / n
		m.m2[b] += m2b[b] + d*d*na*nb/n
	}
	m.n = n
}

// Mean returns the band means (NaN when empty) in dst, allocated when nil.
func (m *Moments) Mean(dst []float64) []float64 {
	if dst == nil {
		dst = make([]float64, m.p)
	}
	for b := range dst {
		dst[b] = m.mean[b]
		if m.n == 0 {
			dst[b] = math.NaN()
		}
	}
	return dst
}

// Variance returns the sample variances (divisor n-1; NaN when n < 2) in
// dst, allocated when nil.
func (m *Moments) Variance(dst []float64) []float64 {
	if dst == nil {
		dst = make([]float64, m.p)
	}
	for b := range dst {
		dst[b] = math.NaN()
		if m.n >= 2 {
			dst[b] = m.m2[b] / (m.n - 1)
		}
	}
	return dst
}
