package scenario

import "math"

// Everything random in this package is a pure function of a 64-bit key and
// integer coordinates: there is no generator state, so any window of any
// product can be rendered on its own, in any order, by any goroutine, with
// bit-identical results.

const (
	golden = 0x9E3779B97F4A7C15 // 2^64 / phi, the splitmix64 increment
	sqrt3  = 1.7320508075688772
)

// mix64 is the splitmix64 finaliser: a bijection on uint64 with good
// avalanche behaviour.
func mix64(z uint64) uint64 {
	z ^= z >> 30
	z *= 0xBF58476D1CE4E5B9
	z ^= z >> 27
	z *= 0x94D049BB133111EB
	z ^= z >> 31
	return z
}

// subKey derives an independent stream key from a parent key and a label.
func subKey(key, label uint64) uint64 { return mix64(key + golden*(label+1)) }

// hash2 hashes two integer coordinates under key.
func hash2(key uint64, a, b int64) uint64 {
	return mix64(mix64(key^uint64(a)*0xD6E8FEB86659FD93) + uint64(b)*golden)
}

// pixelHash hashes a pixel position; it is a bijection of (x, y) for
// |x|, |y| < 2^31, so no two pixels share a noise stream.
func pixelHash(key uint64, x, y int) uint64 {
	return mix64(key ^ (uint64(uint32(y))<<32 | uint64(uint32(x))))
}

// bandHash derives the hash of band b from a pixel hash.
func bandHash(ph uint64, b int) uint64 { return mix64(ph + uint64(b+1)*golden) }

// unit maps a hash to [0, 1).
func unit(h uint64) float64 { return float64(h>>11) * (1.0 / (1 << 53)) }

// gauss maps a hash to an approximately standard normal deviate: the sum of
// four 16-bit uniforms (Irwin-Hall), centred and scaled to unit variance.
// Its tails stop at about 3.46 sigma, which is all a sensor-noise model
// needs and keeps values bounded.
func gauss(h uint64) float64 {
	s := float64(h&0xFFFF) + float64(h>>16&0xFFFF) + float64(h>>32&0xFFFF) + float64(h>>48)
	return (s/65535 - 2) * sqrt3
}

// fade is the quintic smoothstep used by the value noise.
func fade(t float64) float64 { return t * t * t * (t*(t*6-15) + 10) }

// noise1 is 1-D value noise in [-1, 1] with unit lattice spacing.
func noise1(key uint64, t float64) float64 {
	f := math.Floor(t)
	i := int64(f)
	a := 2*unit(hash2(key, i, 0)) - 1
	b := 2*unit(hash2(key, i+1, 0)) - 1
	return a + (b-a)*fade(t-f)
}

// fbm1 is 1-D fractal noise: octaves of noise1, halving the lattice
// spacing and the amplitude each time, normalised to [-1, 1].
func fbm1(key uint64, t float64, octaves int) float64 {
	sum, amp, total := 0.0, 1.0, 0.0
	for o := 0; o < octaves; o++ {
		sum += amp * noise1(subKey(key, uint64(o)), t)
		total += amp
		amp *= 0.5
		t *= 2
	}
	return sum / total
}

// field is a 2-D fBm field built from value noise on hashed lattices: octave
// 0 has a lattice of cellX by cellY pixels, each further octave halves the
// spacing and the amplitude. Values are normalised to [-1, 1] (in practice
// they stay within about +-0.7).
type field struct {
	key          uint64
	cellX, cellY float64
	octaves      int
}

// newField is a field with square cells.
func newField(key uint64, cell float64, octaves int) field {
	return field{key: key, cellX: cell, cellY: cell, octaves: octaves}
}

// fill writes the field at the centres of the pixels of the global window
// (x0, y0, w, h) into dst, whose rows are stride values apart. Each value
// depends only on the global pixel position, never on the window.
func (f field) fill(dst []float32, stride, x0, y0, w, h int) {
	if w <= 0 || h <= 0 {
		return
	}
	for j := 0; j < h; j++ {
		clear(dst[j*stride : j*stride+w])
	}
	ix := make([]int64, w)
	wx := make([]float32, w)
	iy := make([]int64, h)
	wy := make([]float32, h)
	amp, total := float32(1), float32(0)
	cx, cy := f.cellX, f.cellY
	var lat []float32
	for o := 0; o < f.octaves; o++ {
		ok := subKey(f.key, uint64(o))
		off := 64 * unit(ok)
		latticeAxis(x0, cx, off, ix, wx)
		latticeAxis(y0, cy, off, iy, wy)
		bx, by := ix[0], iy[0]
		nx := int(ix[w-1]-bx) + 2
		ny := int(iy[h-1]-by) + 2
		if cap(lat) < nx*ny {
			lat = make([]float32, nx*ny)
		}
		lat = lat[:nx*ny]
		for b := 0; b < ny; b++ {
			for a := 0; a < nx; a++ {
				lat[b*nx+a] = float32(2*unit(hash2(ok, bx+int64(a), by+int64(b))) - 1)
			}
		}
		for j := 0; j < h; j++ {
			r0 := lat[int(iy[j]-by)*nx:]
			r1 := r0[nx:]
			t := wy[j]
			row := dst[j*stride : j*stride+w]
			for i := range row {
				a := int(ix[i] - bx)
				s := wx[i]
				top := r0[a] + (r0[a+1]-r0[a])*s
				bot := r1[a] + (r1[a+1]-r1[a])*s
				row[i] += amp * (top + (bot-top)*t)
			}
		}
		total += amp
		amp *= 0.5
		cx *= 0.5
		cy *= 0.5
	}
	inv := 1 / total
	for j := 0; j < h; j++ {
		row := dst[j*stride : j*stride+w]
		for i := range row {
			row[i] *= inv
		}
	}
}

// latticeAxis computes, for n consecutive pixels from p0, the lattice cell
// index and the faded interpolation weight along one axis.
func latticeAxis(p0 int, cell, off float64, idx []int64, wt []float32) {
	for i := range idx {
		u := (float64(p0+i)+0.5)/cell + off
		f := math.Floor(u)
		idx[i] = int64(f)
		wt[i] = float32(fade(u - f))
	}
}
