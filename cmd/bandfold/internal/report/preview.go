package report

import (
	"bytes"
	"image"
	"image/png"
	"math"
	"strings"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/tiles"
)

// previewSide is the longest side of a quicklook, in pixels, and
// PreviewMin the shortest long side: smaller images are enlarged to it
// (nearest neighbour), so that a preview is readable.
const (
	previewSide = 1024
	PreviewMin  = 800
)

// PreviewSize scales w x h down to fit previewSide, or up to PreviewMin on
// the long side.
func PreviewSize(w, h int) (int, int) {
	f := math.Max(1, float64(max(w, h))/previewSide)
	if long := max(w, h); long < PreviewMin {
		f = float64(long) / PreviewMin
	}
	return max(1, int(math.Round(float64(w)/f))), max(1, int(math.Round(float64(h)/f)))
}

// Composite reads three bands of s (0-based positions) decimated to the
// preview size and stretches each from its 2nd to its 98th percentile.
func Composite(s *raster.Stack, rgb [3]int) (*image.RGBA, error) {
	sub, err := s.Subset(rgb[:])
	if err != nil {
		return nil, err
	}
	r, err := sub.NewReader()
	if err != nil {
		return nil, err
	}
	defer r.Close()
	pw, ph := PreviewSize(s.Width, s.Height)
	vals, valid, err := readPreview(r, s.Width, s.Height, pw, ph)
	if err != nil {
		return nil, err
	}
	var ch [3][]uint8
	band := make([]float64, pw*ph)
	for c := range 3 {
		for i := range band {
			band[i] = vals[i*3+c]
		}
		lim := stretchLimits(band, valid)
		ch[c] = figures.Stretch(band, valid, lim[0], lim[1])
	}
	return figures.RGB(pw, ph, ch[0], ch[1], ch[2], valid), nil
}

// readPreview reads three bands of a w x h image at pw x ph: nearest
// neighbour when enlarging; GDAL's average when reducing by at most 2;
// beyond that, a nearest-neighbour read at 2pw x 2ph averaged 2 x 2 here.
// GDAL's average over a whole large scene reads and sums every pixel of
// the three bands (on two 8192² dates it made change 7-19% slower); four
// samples per preview pixel smooth the speckle of a plain decimation at a
// small part of that cost.
func readPreview(r *raster.Reader, w, h, pw, ph int) ([]float64, []bool, error) {
	whole := tiles.Tile{W: w, H: h}
	vals, valid := make([]float64, pw*ph*3), make([]bool, pw*ph)
	switch {
	case pw >= w:
		_, err := r.ReadScaled(whole, pw, ph, vals, valid)
		return vals, valid, err
	case w <= 2*pw:
		_, err := r.ReadAveraged(whole, pw, ph, vals, valid)
		return vals, valid, err
	}
	fw, fh := min(w, 2*pw), min(h, 2*ph)
	fine, fineValid := make([]float64, fw*fh*3), make([]bool, fw*fh)
	if _, err := r.ReadScaled(whole, fw, fh, fine, fineValid); err != nil {
		return nil, nil, err
	}
	for y := range ph {
		for x := range pw {
			var sum [3]float64
			n := 0
			for _, fy := range []int{min(2*y, fh-1), min(2*y+1, fh-1)} {
				for _, fx := range []int{min(2*x, fw-1), min(2*x+1, fw-1)} {
					i := fy*fw + fx
					if !fineValid[i] {
						continue
					}
					for c := range 3 {
						sum[c] += fine[i*3+c]
					}
					n++
				}
			}
			o := y*pw + x
			if valid[o] = n > 0; valid[o] {
				for c := range 3 {
					vals[o*3+c] = sum[c] / float64(n)
				}
			}
		}
	}
	return vals, valid, nil
}

// stretchLimits are the 2nd and 98th percentiles of a preview band, taken
// over at most about 250,000 evenly strided pixels: display limits need no
// more (sorting a million values per band of two dates cost 5% of a change
// run).
func stretchLimits(band []float64, valid []bool) []float64 {
	stride := max(1, len(band)/250_000)
	if stride == 1 {
		return figures.Percentiles(band, valid, 2, 98)
	}
	n := (len(band) + stride - 1) / stride
	vs, ok := make([]float64, 0, n), make([]bool, 0, n)
	for i := 0; i < len(band); i += stride {
		vs, ok = append(vs, band[i]), append(ok, valid[i])
	}
	return figures.Percentiles(vs, ok, 2, 98)
}

// firstThree are the positions of the first three bands of p (the first
// band repeated when there are fewer).
func firstThree(p int) [3]int { return [3]int{0, min(1, p-1), min(2, p-1)} }

// NaturalColour returns the positions of the red, green and blue bands of
// s, from band descriptions naming them or else from centre wavelengths in
// the visible ranges (blue 450-520 nm, green 520-600 nm, red 620-700 nm, as
// the Landsat and Sentinel-2 visible bands), and false when s does not say.
func NaturalColour(s *raster.Stack) ([3]int, bool) {
	var out [3]int
	names := []string{"red", "green", "blue"}
	found := 0
	for c, name := range names {
		for i, b := range s.Bands {
			n := strings.ToLower(b.Name)
			if n == name || strings.HasPrefix(n, name+" ") || strings.HasSuffix(n, " "+name) || strings.Contains(n, "("+name+")") {
				out[c] = i
				found |= 1 << c
				break
			}
		}
	}
	if found == 7 {
		return out, true
	}
	ranges := [3][2]float64{{620, 700}, {520, 600}, {450, 520}}
	found = 0
	for c, rg := range ranges {
		best := math.Inf(1)
		for i, b := range s.Bands {
			wl := b.WavelengthNM
			if wl >= rg[0] && wl < rg[1] && math.Abs(wl-(rg[0]+rg[1])/2) < best {
				best, out[c] = math.Abs(wl-(rg[0]+rg[1])/2), i
				found |= 1 << c
			}
		}
	}
	return out, found == 7
}

// PreviewBands checks three 1-based band numbers of an image with p bands;
// none means the first three.
func PreviewBands(sel []int, p int) ([3]int, error) {
	if len(sel) == 0 {
		return firstThree(p), nil
	}
	if len(sel) != 3 {
		return [3]int{}, jobkit.Usagef("--preview-bands %v: want three band numbers such as 3,2,1", sel)
	}
	var out [3]int
	for i, b := range sel {
		if b < 1 || b > p {
			return out, jobkit.Usagef("--preview-bands: band %d out of range (the image has %d bands)", b, p)
		}
		out[i] = b - 1
	}
	return out, nil
}

// EncodePNG encodes img.
func EncodePNG(img image.Image) ([]byte, error) {
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// ComponentPreview returns an RGB quicklook of components 1-3 of the
// component image at path.
func ComponentPreview(path string) ([]byte, error) {
	s, err := raster.Open([]string{path})
	if err != nil {
		return nil, err
	}
	defer s.Close()
	img, err := Composite(s, firstThree(s.Len()))
	if err != nil {
		return nil, err
	}
	return EncodePNG(img)
}
