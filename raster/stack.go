package raster

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/airbusgeo/godal"
)

// Sentinel errors callers may branch on. Errors returned by this package wrap
// them and name the file concerned.
var (
	ErrNotFound     = errors.New("no such file")
	ErrNotRaster    = errors.New("not a raster GDAL can read")
	ErrGridMismatch = errors.New("grids differ")
	ErrBandRange    = errors.New("band out of range")
)

// Grid is the pixel grid of a raster: its size, geotransform and CRS.
type Grid struct {
	Width, Height int
	// GeoTransform maps pixel (col, row) to georeferenced (x, y) as GDAL
	// does; HasGeoTransform is false when the file carries none.
	GeoTransform    [6]float64
	HasGeoTransform bool
	// Projection is the CRS as WKT, empty when the file has none.
	Projection string
}

// Band describes one selected band of a stack.
type Band struct {
	// Name is the band description, or "<file stem>:<band number>".
	Name string
	// Path and Index locate the band: its file and 1-based number there.
	Path     string
	Index    int
	DataType string
	// NoData is the value that marks an invalid pixel, nil when none.
	NoData *float64
	// Scale and Offset turn stored values into physical ones:
	// value = stored * Scale + Offset.
	Scale, Offset float64
}

// Stack is one logical p-band image made of one multiband file or several
// files stacked in order, all on one grid. It holds descriptions only; read
// it through a Reader, one per goroutine.
type Stack struct {
	Grid
	Paths []string
	Bands []Band
	// BlockW and BlockH are the internal block size of the first band,
	// which tile sizes are aligned to.
	BlockW, BlockH int
	// Masks are optional validity mask files (same grid; a pixel is valid
	// only where every mask is non-zero).
	Masks []string
	// Metadata is the first file's dataset metadata (default domain).
	Metadata map[string]string
	// runs group selected bands that can be read with one call: positions
	// pos..pos+len(bands)-1 of the pixel vector come from the 0-based bands
	// of one file.
	runs []run
}

type run struct {
	file  int
	pos   int
	bands []int
}

type openOptions struct {
	bands  []int
	nodata []float64
	masks  []string
}

// Option configures Open.
type Option func(*openOptions)

// SelectBands keeps the given 1-based bands of the stacked image, in that
// order. Nil or empty keeps every band.
func SelectBands(bands []int) Option { return func(o *openOptions) { o.bands = bands } }

// NoData overrides the files' nodata: one value for all selected bands, or
// one per selected band.
func NoData(values []float64) Option { return func(o *openOptions) { o.nodata = values } }

// Mask adds a validity mask file on the stack's grid; non-zero means valid.
// Several masks combine: a pixel must be valid in all of them.
func Mask(path string) Option { return func(o *openOptions) { o.masks = append(o.masks, path) } }

// IsVirtual reports whether path is one of GDAL's virtual file system paths
// (/vsizip/, /vsicurl/, /vsis3/, /vsimem/ ...).
func IsVirtual(path string) bool { return strings.HasPrefix(path, "/vsi") }

// openDataset opens path read-only with a clear, file-naming error.
func openDataset(path string) (*godal.Dataset, error) {
	if !IsVirtual(path) {
		fi, err := os.Stat(path)
		switch {
		case errors.Is(err, os.ErrNotExist):
			return nil, fmt.Errorf("%s: %w", path, ErrNotFound)
		case err != nil:
			return nil, fmt.Errorf("%s: %w", path, err)
		case fi.IsDir():
			return nil, fmt.Errorf("%s: is a folder: %w", path, ErrNotRaster)
		}
	}
	ds, err := godal.Open(path, godal.RasterOnly(), errLogger)
	if err != nil {
		return nil, fmt.Errorf("%s: %w (%s)", path, ErrNotRaster, firstLine(err.Error()))
	}
	if len(ds.Bands()) == 0 {
		ds.Close(errLogger)
		return nil, fmt.Errorf("%s: has no raster bands: %w", path, ErrNotRaster)
	}
	return ds, nil
}

func firstLine(s string) string {
	s, _, _ = strings.Cut(strings.TrimSpace(s), "\n")
	return s
}

func gridOf(ds *godal.Dataset) Grid {
	st := ds.Structure()
	g := Grid{Width: st.SizeX, Height: st.SizeY, Projection: ds.Projection()}
	if gt, err := ds.GeoTransform(errLogger); err == nil {
		g.GeoTransform, g.HasGeoTransform = gt, true
	}
	return g
}

// Compare returns nil when g and o are the same grid: same size, geotransforms
// equal to 1e-9 relative (of the pixel size for the offsets and rotation
// terms), and the same CRS by GDAL's comparison. Otherwise the error says
// what differs and wraps ErrGridMismatch.
func (g Grid) Compare(o Grid) error {
	if g.Width != o.Width || g.Height != o.Height {
		return fmt.Errorf("size %dx%d against %dx%d: %w", o.Width, o.Height, g.Width, g.Height, ErrGridMismatch)
	}
	if g.HasGeoTransform != o.HasGeoTransform {
		return fmt.Errorf("one has a geotransform, the other none: %w", ErrGridMismatch)
	}
	if g.HasGeoTransform {
		scale := max(math.Abs(g.GeoTransform[1]), math.Abs(g.GeoTransform[5]), math.Abs(g.GeoTransform[2]), math.Abs(g.GeoTransform[4]))
		for i := range 6 {
			a, b := g.GeoTransform[i], o.GeoTransform[i]
			tol := 1e-9 * max(math.Abs(a), math.Abs(b), scale)
			if math.Abs(a-b) > tol {
				return fmt.Errorf("geotransform %v against %v: %w", o.GeoTransform, g.GeoTransform, ErrGridMismatch)
			}
		}
	}
	same, err := sameCRS(g.Projection, o.Projection)
	if err != nil {
		return err
	}
	if !same {
		return fmt.Errorf("CRS %s against %s: %w", crsName(o.Projection), crsName(g.Projection), ErrGridMismatch)
	}
	return nil
}

func sameCRS(a, b string) (bool, error) {
	if a == "" || b == "" {
		return a == b, nil
	}
	if a == b {
		return true, nil
	}
	sa, err := godal.NewSpatialRefFromWKT(a, errLogger)
	if err != nil {
		return false, fmt.Errorf("read CRS: %w", err)
	}
	defer sa.Close()
	sb, err := godal.NewSpatialRefFromWKT(b, errLogger)
	if err != nil {
		return false, fmt.Errorf("read CRS: %w", err)
	}
	defer sb.Close()
	return sa.IsSame(sb), nil
}

// crsName gives a short name for a WKT CRS for error messages.
func crsName(wkt string) string {
	if wkt == "" {
		return "(none)"
	}
	if _, rest, ok := strings.Cut(wkt, `"`); ok {
		if name, _, ok := strings.Cut(rest, `"`); ok {
			return fmt.Sprintf("%q", name)
		}
	}
	return "(unnamed)"
}

// Open opens the files of a stack, checks that they share one grid, applies
// the band selection and nodata overrides and, when asked, checks the mask.
// Any GDAL-readable path works, virtual ones included.
func Open(paths []string, opts ...Option) (*Stack, error) {
	if len(paths) == 0 {
		return nil, errors.New("no input image")
	}
	var o openOptions
	for _, opt := range opts {
		opt(&o)
	}
	s := &Stack{Paths: paths, Masks: o.masks}
	var all []Band
	var fileOf []int
	for i, p := range paths {
		ds, err := openDataset(p)
		if err != nil {
			return nil, err
		}
		g := gridOf(ds)
		if i == 0 {
			s.Grid = g
			st := ds.Structure()
			s.BlockW, s.BlockH = st.BlockSizeX, st.BlockSizeY
			s.Metadata = ds.Metadatas()
		} else if err := s.Grid.Compare(g); err != nil {
			ds.Close(errLogger)
			return nil, fmt.Errorf("%s is not on the grid of %s: %w", p, paths[0], err)
		}
		for j, b := range ds.Bands() {
			all = append(all, describeBand(p, j+1, b))
			fileOf = append(fileOf, i)
		}
		if err := ds.Close(errLogger); err != nil {
			return nil, fmt.Errorf("%s: %w", p, err)
		}
	}

	sel := o.bands
	if len(sel) == 0 {
		sel = make([]int, len(all))
		for i := range sel {
			sel[i] = i + 1
		}
	}
	for _, n := range sel {
		if n < 1 || n > len(all) {
			return nil, fmt.Errorf("%s: band %d selected but the stack has %d bands: %w", strings.Join(paths, ", "), n, len(all), ErrBandRange)
		}
		s.addBand(all[n-1], fileOf[n-1])
	}

	switch len(o.nodata) {
	case 0:
	case 1, len(s.Bands):
		for i := range s.Bands {
			v := o.nodata[min(i, len(o.nodata)-1)]
			s.Bands[i].NoData = &v
		}
	default:
		return nil, fmt.Errorf("nodata: %d values given for %d bands (give one, or one per band): %w", len(o.nodata), len(s.Bands), ErrBadSpec)
	}

	for _, m := range o.masks {
		ds, err := openDataset(m)
		if err != nil {
			return nil, fmt.Errorf("mask %w", err)
		}
		g := gridOf(ds)
		ds.Close(errLogger)
		if err := s.Grid.Compare(g); err != nil {
			return nil, fmt.Errorf("mask %s is not on the grid of %s: %w", m, paths[0], err)
		}
	}
	return s, nil
}

func describeBand(path string, index int, b godal.Band) Band {
	out := Band{Path: path, Index: index, DataType: b.Structure().DataType.String()}
	if nd, ok := b.NoData(); ok {
		out.NoData = &nd
	}
	out.Scale, out.Offset = bandScaleOffset(b)
	out.Name = strings.TrimSpace(b.Description())
	if out.Name == "" {
		out.Name = fmt.Sprintf("%s:%d", Stem(path), index)
	}
	return out
}

// Stem is a file name without folders and extension ("a/b/scene.tif" ->
// "scene"); for GDAL virtual paths the last element is used.
func Stem(path string) string {
	base := filepath.Base(path)
	return strings.TrimSuffix(base, filepath.Ext(base))
}

// Len returns the number of selected bands of the stack.
func (s *Stack) Len() int { return len(s.Bands) }

// EPSG returns the WKT of the CRS with the given EPSG code.
func EPSG(code int) (string, error) {
	sr, err := godal.NewSpatialRefFromEPSG(code, errLogger)
	if err != nil {
		return "", fmt.Errorf("EPSG:%d: %w", code, err)
	}
	defer sr.Close()
	return sr.WKT(errLogger)
}

// addBand appends band b of file f to the stack, extending the last read
// run when b follows it in the same file.
func (s *Stack) addBand(b Band, f int) {
	s.Bands = append(s.Bands, b)
	pos := len(s.Bands) - 1
	idx := b.Index - 1 // godal counts bands from 0
	if k := len(s.runs) - 1; k >= 0 && s.runs[k].file == f && s.runs[k].pos+len(s.runs[k].bands) == pos {
		s.runs[k].bands = append(s.runs[k].bands, idx)
	} else {
		s.runs = append(s.runs, run{file: f, pos: pos, bands: []int{idx}})
	}
}

// Subset returns a stack of the same files and masks holding only the bands
// at the given 0-based positions of s.Bands, in that order.
func (s *Stack) Subset(positions []int) (*Stack, error) {
	sub := &Stack{Grid: s.Grid, Paths: s.Paths, BlockW: s.BlockW, BlockH: s.BlockH, Masks: s.Masks, Metadata: s.Metadata}
	fileOf := map[string]int{}
	for i, p := range s.Paths {
		fileOf[p] = i
	}
	for _, pos := range positions {
		if pos < 0 || pos >= len(s.Bands) {
			return nil, fmt.Errorf("%s: band %d selected but the stack has %d bands: %w", strings.Join(s.Paths, ", "), pos+1, len(s.Bands), ErrBandRange)
		}
		b := s.Bands[pos]
		sub.addBand(b, fileOf[b.Path])
	}
	return sub, nil
}
