package raster

import (
	"errors"
	"fmt"
	"math"

	"github.com/airbusgeo/godal"

	"bandfold/tiles"
)

// Reader reads tile windows of a stack. It owns one GDAL dataset handle per
// file and must be used by one goroutine only; make one per worker.
type Reader struct {
	s       *Stack
	ds      []*godal.Dataset
	masks   []*godal.Dataset
	maskBuf []float64
	nodata  []float64
	hasND   []bool
	scaled  bool
	// signed marks the bands stored as GDAL 3.6's signed byte, which GDAL
	// reads as 0..255: values from 128 are turned into v - 256.
	signed    []bool
	anySigned bool
	// check is false when no value can be invalid: integer bands (never
	// NaN or infinite) without nodata.
	check bool
	// average makes ReadScaled average instead of taking the nearest pixel.
	average bool
	// native[k] is the data type shared by every band of run k when reads
	// at full resolution take it in that type and widen it to float64 in Go
	// (see readNative); "" when GDAL converts the run to float64 itself.
	native []string
	raw    rawBuffers
}

// rawBuffers hold a window of one run in its stored type.
type rawBuffers struct {
	u8  []uint8
	i16 []int16
	u16 []uint16
	i32 []int32
	u32 []uint32
	f32 []float32
}

// widening says where readWiden puts the values of a run: into dst,
// pixel-major with p values a pixel, from position pos of each pixel.
type widening struct {
	dst    []float64
	pos, p int
}

// NewReader opens the stack's files for reading by one goroutine.
func (s *Stack) NewReader() (*Reader, error) {
	r := &Reader{s: s}
	for _, p := range s.sources {
		ds, err := openDataset(p)
		if err != nil {
			r.Close()
			return nil, err
		}
		r.ds = append(r.ds, ds)
	}
	for _, m := range s.maskSources {
		ds, err := openDataset(m)
		if err != nil {
			r.Close()
			return nil, fmt.Errorf("mask %w", err)
		}
		r.masks = append(r.masks, ds)
	}
	for _, b := range s.Bands {
		nd, has := 0.0, b.NoData != nil && !math.IsNaN(*b.NoData)
		if has {
			nd = *b.NoData
		}
		r.nodata = append(r.nodata, nd)
		r.hasND = append(r.hasND, has)
		if has || !isInteger(b.DataType) {
			r.check = true
		}
		if b.Scale != 1 || b.Offset != 0 {
			r.scaled = true
		}
		r.signed = append(r.signed, b.DataType == SignedByte)
		r.anySigned = r.anySigned || b.DataType == SignedByte
	}
	for _, rn := range s.runs {
		r.native = append(r.native, nativeType(s.Bands[rn.pos:rn.pos+len(rn.bands)]))
	}
	return r, nil
}

// nativeType returns the stored type of bands when they all share one that
// readNative handles, "" otherwise.
func nativeType(bands []Band) string {
	t := bands[0].DataType
	for _, b := range bands {
		if b.DataType != t {
			return ""
		}
	}
	switch t {
	case "Byte", SignedByte, "Int16", "UInt16", "Int32", "UInt32", "Float32":
		return t
	}
	return ""
}

// readNative reads window t of run k at full resolution in the bands'
// stored type and widens the values into dst. Every value of these types
// is exactly a float64, so the result is the one GDAL's own conversion
// gives; but GDAL converting into a pixel-interleaved float64 buffer costs
// several times the read itself on a hyperspectral cube (224 Int16 bands
// of 1024 x 1024 in 256 x 256 blocks: about 2 s against 0.3 s).
func (r *Reader) readNative(k int, t tiles.Tile, dst []float64) error {
	rn := r.s.runs[k]
	ds, to := r.ds[rn.file], widening{dst: dst, pos: rn.pos, p: len(r.s.Bands)}
	switch r.native[k] {
	case "Byte", SignedByte:
		return readWiden(ds, t, rn.bands, &r.raw.u8, to)
	case "Int16":
		return readWiden(ds, t, rn.bands, &r.raw.i16, to)
	case "UInt16":
		return readWiden(ds, t, rn.bands, &r.raw.u16, to)
	case "Int32":
		return readWiden(ds, t, rn.bands, &r.raw.i32, to)
	case "UInt32":
		return readWiden(ds, t, rn.bands, &r.raw.u32, to)
	default:
		return readWiden(ds, t, rn.bands, &r.raw.f32, to)
	}
}

// readWiden reads window t of the given bands of ds into *buf, pixel-major,
// grown as needed, then widens the values as to says.
func readWiden[T uint8 | int16 | uint16 | int32 | uint32 | float32](ds *godal.Dataset, t tiles.Tile, bands []int, buf *[]T, to widening) error {
	nb, n := len(bands), t.Pixels()
	if cap(*buf) < n*nb {
		*buf = make([]T, n*nb)
	}
	src := (*buf)[:n*nb]
	if err := ds.Read(t.X, t.Y, src, t.W, t.H, godal.Bands(bands...),
		godal.PixelStride(nb), godal.LineStride(nb*t.W), godal.BandStride(1), errLogger); err != nil {
		return err
	}
	if nb == to.p {
		dst := to.dst[:len(src)]
		for i, v := range src {
			dst[i] = float64(v)
		}
		return nil
	}
	for i := range n {
		px := to.dst[i*to.p+to.pos : i*to.p+to.pos+nb]
		for j, v := range src[i*nb : i*nb+nb] {
			px[j] = float64(v)
		}
	}
	return nil
}

// Close releases the reader's dataset handles.
func (r *Reader) Close() error {
	var errs []error
	for _, ds := range r.ds {
		errs = append(errs, ds.Close(errLogger))
	}
	for _, m := range r.masks {
		errs = append(errs, m.Close(errLogger))
	}
	r.ds, r.masks = nil, nil
	return errors.Join(errs...)
}

// Read reads window t of every selected band into dst, pixel-major (the p
// band values of a pixel are consecutive; pixels row by row), and marks in
// valid the pixels that are valid in every band: not nodata, not NaN or
// infinite, and passing every mask rule. Validity is decided on the stored
// values; then each band's Scale and Offset (its metadata, or its TOA
// reflectance calibration) are applied. It returns the number of valid
// pixels. dst needs at least t.Pixels()*p values and valid t.Pixels().
func (r *Reader) Read(t tiles.Tile, dst []float64, valid []bool) (int, error) {
	return r.read(t, t.W, t.H, dst, valid)
}

// ReadScaled reads window t resampled (nearest neighbour, through GDAL's
// overviews when the file has them) to w x h pixels: a decimated read for
// quicklooks that costs memory for w x h pixels only.
func (r *Reader) ReadScaled(t tiles.Tile, w, h int, dst []float64, valid []bool) (int, error) {
	return r.read(t, w, h, dst, valid)
}

// ReadAveraged is ReadScaled with GDAL's average resampling: each output
// pixel is the mean of the valid pixels under it, for reduced quicklooks.
func (r *Reader) ReadAveraged(t tiles.Tile, w, h int, dst []float64, valid []bool) (int, error) {
	r.average = true
	defer func() { r.average = false }()
	return r.read(t, w, h, dst, valid)
}

func (r *Reader) read(t tiles.Tile, bw, bh int, dst []float64, valid []bool) (int, error) {
	p, n := len(r.s.Bands), bw*bh
	if len(dst) < n*p || len(valid) < n {
		panic(fmt.Sprintf("raster: buffers of %d values and %d flags for %v of %d bands", len(dst), len(valid), t, p))
	}
	dst, valid = dst[:n*p], valid[:n]
	window := godal.Window(t.W, t.H)
	alg := godal.Nearest
	if r.average {
		alg = godal.Average
	}
	for k, rn := range r.s.runs {
		var err error
		if bw == t.W && bh == t.H && r.native[k] != "" {
			err = r.readNative(k, t, dst)
		} else {
			err = r.ds[rn.file].Read(t.X, t.Y, dst[rn.pos:], bw, bh, window, godal.Resampling(alg),
				godal.Bands(rn.bands...), godal.PixelStride(p), godal.LineStride(p*bw), godal.BandStride(1), errLogger)
		}
		if err != nil {
			return 0, fmt.Errorf("read %s at %v: %w", r.s.Paths[rn.file], t, tidyRead(err))
		}
	}
	for i := range valid {
		valid[i] = true
	}
	for k, mask := range r.masks {
		if cap(r.maskBuf) < n {
			r.maskBuf = make([]float64, n)
		}
		m := r.maskBuf[:n]
		if err := mask.Read(t.X, t.Y, m, bw, bh, window, godal.Bands(0), errLogger); err != nil {
			return 0, fmt.Errorf("read mask %s at %v: %w", r.s.Masks[k], t, tidyRead(err))
		}
		test := &r.s.maskTests[k]
		for i, v := range m {
			valid[i] = valid[i] && test.valid(v)
		}
	}
	count := 0
	for i := range n {
		if !valid[i] {
			continue
		}
		px := dst[i*p : i*p+p]
		if r.anySigned {
			unsign(px, r.signed)
		}
		if r.check && !r.validPixel(px) {
			valid[i] = false
			continue
		}
		count++
		if r.scaled {
			for b := range px {
				px[b] = px[b]*r.s.Bands[b].Scale + r.s.Bands[b].Offset
			}
		}
	}
	return count, nil
}

// validPixel reports whether no value of px is NaN, infinite or nodata.
func (r *Reader) validPixel(px []float64) bool {
	for b, v := range px {
		// v-v is NaN for NaN and infinities, 0 otherwise.
		if v-v != 0 || (r.hasND[b] && v == r.nodata[b]) {
			return false
		}
	}
	return true
}

// isInteger reports whether a GDAL data type name is an integer type.
func isInteger(dataType string) bool {
	return integerBits(dataType) > 0
}

// unsign turns the values of the signed-byte bands of px, read by GDAL as
// 0..255, into -128..127.
func unsign(px []float64, signed []bool) {
	for b, v := range px {
		if signed[b] && v >= 128 {
			px[b] = v - 256
		}
	}
}
