package raster

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
)

// Sentinel errors callers may branch on. Errors returned by this package wrap
// them and name the file concerned.
var (
	ErrNotFound     = errors.New("no such file")
	ErrNotRaster    = errors.New("not a raster GDAL can read")
	ErrGridMismatch = errors.New("grids differ")
	ErrBandRange    = errors.New("band out of range")
	// ErrComplex marks a selected band (or a mask's band 1) of a complex
	// type, CInt16, CInt32, CFloat32 or CFloat64: bandfold reads real
	// values only, and GDAL would silently drop the imaginary part. Its
	// errors also match ErrBadSpec: the band selection cannot apply.
	ErrComplex = errors.New("complex band")
)

// isComplex reports whether a GDAL data type name is a complex type.
func isComplex(dataType string) bool {
	switch dataType {
	case "CInt16", "CInt32", "CFloat32", "CFloat64":
		return true
	}
	return false
}

// complexErr is the refusal of band index of path, of complex type
// dataType; it matches ErrComplex and ErrBadSpec.
func complexErr(prefix, path string, index int, dataType string) error {
	return specErr(errors.Join(ErrComplex, ErrBadSpec), "%sband %d of %s is complex (%s): bandfold reads real values only", prefix, index, path, dataType)
}

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
	// Name is the band description; for a stack of single-band files
	// without descriptions, the part of the file names that tells the files
	// apart ("B1" for "..._T1_B1.TIF"); otherwise "<file stem>:<band
	// number>".
	Name string
	// Path and Index locate the band: its file and 1-based number there.
	Path  string
	Index int
	// DataType is the GDAL type read: the file's, or the warped VRT's when
	// the file was aligned onto the stack's grid.
	DataType string
	// NoData is the value that marks an invalid pixel (possibly NaN), nil
	// when none.
	NoData *float64
	// Scale and Offset turn stored values into the values read:
	// value = stored * Scale + Offset. With Calibration "scale" they are
	// the band's scale and offset metadata (1 and 0 when absent); with
	// "toa" they are ReflMult/sin(SunElevation) and
	// ReflAdd/sin(SunElevation).
	Scale, Offset float64
	// Calibration is CalibrateScale or CalibrateTOA (see Calibrate).
	Calibration string
	// ReflMult, ReflAdd and SunElevation are, for CalibrateTOA, the band's
	// REFLECTANCE_MULT_BAND_n and REFLECTANCE_ADD_BAND_n and the scene's
	// SUN_ELEVATION (degrees) from the product's MTL file; zero otherwise.
	ReflMult, ReflAdd, SunElevation float64
	// WavelengthNM and FWHMNM are the band's centre wavelength and full
	// width at half maximum in nanometres from its metadata, 0 when unknown
	// (see bandWavelength).
	WavelengthNM, FWHMNM float64
	// Range is the band's spectral range: centre ± FWHM/2 from its
	// metadata, or the nominal band edges of its sensor for a Landsat band
	// file beside its *_MTL.txt; zero when unknown.
	Range SpectralRange
	// Product names the band as its product does ("LANDSAT_8 OLI_TIRS band
	// 4") when its MTL told its sensor; empty otherwise.
	Product string
}

// Stack is one logical p-band image made of one multiband file or several
// files stacked in order, on the first file's grid. It holds descriptions
// only; read it through a Reader, one per goroutine. Close it when done:
// files warped onto its grid live as temporary VRTs until then.
type Stack struct {
	Grid
	Paths []string
	Bands []Band
	// Label names the stack for people: for single-band files told apart
	// by their names, the shared part of the names and the range of bands
	// ("LC08_L1TP_195025_20130707_20170503_01_T1 [B1-B7]"); for one file,
	// its stem; otherwise the stems joined with commas.
	Label string
	// BlockW and BlockH are the internal block size of the first band,
	// which tile sizes are aligned to.
	BlockW, BlockH int
	// MaskRules are the quality masks (see MaskRule); a pixel is valid only
	// where it passes every rule. Masks are their files, in the same order.
	MaskRules []MaskRule
	Masks     []string
	// Aligned are the files (of Paths and Masks) warped onto the grid.
	Aligned []string
	// Metadata is the first file's dataset metadata (default domain).
	Metadata map[string]string
	// Notes say, for people, what Open did that was not asked for (a
	// product's bands resampled onto its finest grid).
	Notes []string
	// runs group selected bands that can be read with one call: positions
	// pos..pos+len(bands)-1 of the pixel vector come from the 0-based bands
	// of one file.
	runs []run
	// sources are what readers open for Paths and masks: the file itself
	// or its warped VRT.
	sources, maskSources []string
	// sideFiles are the metadata files read beside the bands (SideFiles).
	sideFiles []string
	maskTests []maskTest
	// parts are the names telling single-band files apart (by path), for
	// the label; nil when the files are not such a stack.
	parts       map[string]string
	labelCommon string
	cleanups    []func()
}

type run struct {
	file  int
	pos   int
	bands []int
}

type openOptions struct {
	bands     []int
	bandNames []string
	nodata    []float64
	masks     []MaskRule
	align     string
	maskAlign string
	calibrate string
	assets    []string
	// onto is the grid every file is warped onto (OntoGrid), nil for the
	// first file's.
	onto *Grid
}

// Option configures Open.
type Option func(*openOptions)

// SelectBands keeps the given 1-based bands of the stacked image, in that
// order. Nil or empty keeps every band.
func SelectBands(bands []int) Option { return func(o *openOptions) { o.bands = bands } }

// SelectBandNames keeps the bands of the given names (any case), in that
// order: the names bandfold gives the bands (a band file's distinguishing
// part, "B4"; a description), or a product's band names ("B02", "B8A" for
// a Sentinel-2 product folder, whose files it picks). It replaces
// SelectBands.
func SelectBandNames(names []string) Option { return func(o *openOptions) { o.bandNames = names } }

// SelectAssets picks the assets of a STAC item, in that order, by key or
// by the eo:bands common name or name of a one-band asset ("red",
// "nir08", "B4"); without it an item gives its data assets. Band
// selections then apply to the bands of those assets. It is an error for
// an image that is not a STAC item.
func SelectAssets(names []string) Option { return func(o *openOptions) { o.assets = names } }

// OntoGrid makes the stack take grid g instead of its first file's grid,
// warping every file not on it with the given resampling, as AlignStack
// does: to open one date of a series on the reference date's grid. Masks
// must be on g or are warped with nearest neighbour.
func OntoGrid(g Grid, resampling string) Option {
	return func(o *openOptions) { o.onto, o.align = &g, cmp.Or(resampling, "bilinear") }
}

// NoData overrides the files' nodata: one value for all selected bands, or
// one per selected band. NaN is allowed.
func NoData(values []float64) Option { return func(o *openOptions) { o.nodata = values } }

// Mask adds a validity mask file on the stack's grid; non-zero means valid.
// It is MaskRules(MaskRule{Path: path}).
func Mask(path string) Option { return MaskRules(MaskRule{Path: path}) }

// MaskRules adds quality masks (see ParseMask). Several rules combine: a
// pixel must pass all of them. A mask file may be one of the stack's files.
// A mask on another grid is an error unless AlignMasks or AlignStack is
// given.
func MaskRules(rules ...MaskRule) Option {
	return func(o *openOptions) { o.masks = append(o.masks, rules...) }
}

// AlignStack warps every file of the stack that is not on the first file's
// grid onto it, through a GDAL warped VRT (see AlignTo: nothing is copied,
// each read resamples), with the given resampling (see ParseResampling).
// Nodata overrides given with NoData are honoured by the warp. Masks on
// other grids are then warped too, with nearest neighbour unless AlignMasks
// says otherwise. Close the stack to release the VRTs.
func AlignStack(resampling string) Option { return func(o *openOptions) { o.align = resampling } }

// AlignMasks warps masks that are not on the stack's grid onto it, with
// resampling "nearest" or "mode": masks hold codes, which other kernels
// would blend.
func AlignMasks(resampling string) Option { return func(o *openOptions) { o.maskAlign = resampling } }

// Calibrate sets how stored values become the values read: CalibrateScale
// ("scale", the default) applies each band's scale and offset metadata;
// CalibrateTOA ("toa") turns the digital numbers of Landsat Level-1 band
// files into top-of-atmosphere reflectance with the coefficients of the
// product's *_MTL.txt file beside them (see FindMTL):
//
//	rho = (M_rho * Q_cal + A_rho) / sin(theta_SE)
//
// with M_rho = REFLECTANCE_MULT_BAND_n, A_rho = REFLECTANCE_ADD_BAND_n and
// theta_SE = SUN_ELEVATION, from the USGS "Landsat 8 (L8) Data Users
// Handbook", section "Conversion to TOA Reflectance". Validity (nodata,
// masks) is decided on the digital numbers, before calibration.
func Calibrate(mode string) Option { return func(o *openOptions) { o.calibrate = mode } }

// IsVirtual reports whether path is one of GDAL's virtual file system paths
// (/vsizip/, /vsicurl/, /vsis3/, /vsimem/ ...).
func IsVirtual(path string) bool { return strings.HasPrefix(path, "/vsi") }

// openDataset opens path read-only with a clear, file-naming error.
func openDataset(path string) (*godal.Dataset, error) {
	if !IsVirtual(path) {
		// A missing or unreadable file matches output.ErrInput (a usage
		// error) and, missing, ErrNotFound.
		if err := output.CheckInput(path, ErrNotFound); err != nil {
			return nil, err
		}
		if fi, err := os.Stat(path); err == nil && fi.IsDir() {
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

// openWithAux opens a local raster as openDataset does, and with the
// .aux.xml beside it, where GDAL keeps what a GeoTIFF has no place for
// (bandfold's class tables, a COG's wavelengths). Inputs are otherwise
// opened without sidecars (godal's default): with any, GDAL 3.6 also runs
// its metadata readers, which date a Landsat Collection 1 scene
// 1970-01-01 from its MTL file.
func openWithAux(path string) (*godal.Dataset, error) {
	if IsVirtual(path) {
		return openDataset(path)
	}
	if err := output.CheckInput(path, ErrNotFound); err != nil {
		return nil, err
	}
	base := filepath.Base(path)
	ds, err := godal.Open(path, godal.RasterOnly(), godal.SiblingFiles(base+".aux.xml"), errLogger)
	if err != nil {
		return nil, fmt.Errorf("%s: %w (%s)", path, ErrNotRaster, firstLine(err.Error()))
	}
	return ds, nil
}

func firstLine(s string) string {
	s, _, _ = strings.Cut(strings.TrimSpace(s), "\n")
	return s
}

// Open opens the files of a stack, checks that they share the first file's
// grid (or warps them onto it, with AlignStack), names the bands, applies
// the band selection, nodata overrides and calibration, and checks the
// masks. Any GDAL-readable path works, virtual ones included. Close the
// stack when done.
func Open(paths []string, opts ...Option) (_ *Stack, err error) {
	if len(paths) == 0 {
		return nil, errors.New("no input image")
	}
	var o openOptions
	for _, opt := range opts {
		opt(&o)
	}
	if o.align != "" {
		if o.align, err = ParseResampling(o.align); err != nil {
			return nil, fmt.Errorf("align: %w", err)
		}
		o.maskAlign = cmp.Or(o.maskAlign, "nearest")
	}
	if o.maskAlign != "" {
		if o.maskAlign, err = maskResampling(o.maskAlign); err != nil {
			return nil, err
		}
	}
	if o.calibrate, err = ParseCalibration(cmp.Or(o.calibrate, CalibrateScale)); err != nil {
		return nil, err
	}

	ref := 0 // the file whose grid the stack takes
	var product string
	var item *itemStack
	if err := stacOnly(paths, &o); err != nil {
		return nil, err
	}
	if slices.ContainsFunc(paths, IsSTAC) {
		if item, err = openItem(paths, &o); err != nil {
			return nil, err
		}
		paths = item.paths
	} else if len(paths) == 1 && IsS2Product(paths[0]) {
		product = paths[0]
		if paths, ref, err = S2ProductFiles(paths[0], o.bandNames); err != nil {
			return nil, err
		}
		o.bandNames = nil
		o.align = cmp.Or(o.align, "bilinear")
		o.maskAlign = cmp.Or(o.maskAlign, "nearest")
	}
	s := &Stack{Paths: paths}
	defer func() {
		if err != nil {
			s.Close()
		}
	}()
	if err := s.takeGrid(paths[ref]); err != nil {
		return nil, err
	}
	if o.onto != nil {
		s.Grid, ref = *o.onto, -1 // every file is compared with it
	}
	var all []Band
	var fileOf, counts []int
	offGrids := map[int]bool{} // files to warp
	for i, p := range paths {
		ds, err := openDataset(p)
		if err != nil {
			return nil, err
		}
		if g := gridOf(ds); i != ref && s.Grid.Compare(g) != nil {
			if o.align == "" {
				ds.Close(errLogger)
				return nil, offGrid("", p, g, paths[ref], s.Grid, s.Grid.Compare(g))
			}
			offGrids[i] = true
		}
		for j, b := range ds.Bands() {
			all = append(all, describeBand(p, j+1, b))
			fileOf = append(fileOf, i)
		}
		counts = append(counts, len(ds.Bands()))
		auxWavelengths(p, all[len(all)-len(ds.Bands()):])
		if err := ds.Close(errLogger); err != nil {
			return nil, fmt.Errorf("%s: %w", p, err)
		}
	}
	s.nameBands(all, counts)
	read, readS2 := mtlCache(), s2Cache()
	s.nameProductBands(all, readS2)
	if item != nil {
		item.describe(s, all, counts, fileOf)
	}

	sel := o.bands
	if len(o.bandNames) > 0 {
		if sel, err = selectByName(all, o.bandNames, paths); err != nil {
			return nil, err
		}
	}
	if len(sel) == 0 {
		sel = make([]int, len(all))
		for i := range sel {
			sel[i] = i + 1
		}
	}
	for _, n := range sel {
		if n < 1 || n > len(all) {
			return nil, specErr(ErrBandRange, "%s: band %d selected but the stack has %d bands", strings.Join(paths, ", "), n, len(all))
		}
		if b := all[n-1]; isComplex(b.DataType) {
			return nil, complexErr("", b.Path, b.Index, b.DataType)
		}
		s.addBand(all[n-1], fileOf[n-1])
	}

	// overrides[f][j] is the nodata given for band j of file f.
	overrides := make([]map[int]float64, len(paths))
	switch len(o.nodata) {
	case 0:
	case 1, len(s.Bands):
		for i := range s.Bands {
			v := o.nodata[min(i, len(o.nodata)-1)]
			s.Bands[i].NoData = &v
		}
		for k, n := range sel {
			f := fileOf[n-1]
			if overrides[f] == nil {
				overrides[f] = map[int]float64{}
			}
			overrides[f][all[n-1].Index-1] = o.nodata[min(k, len(o.nodata)-1)]
		}
	default:
		return nil, specErr(ErrBadSpec, "nodata: %d values given for %d bands (give one, or one per band)", len(o.nodata), len(s.Bands))
	}
	if len(o.nodata) == 0 {
		s.productNoData(overrides, fileOf, sel, readS2)
	}

	s.sources = slices.Clone(paths)
	for i, p := range paths {
		if offGrids[i] {
			if err := s.align(i, p, o.align, overrides[i]); err != nil {
				return nil, err
			}
		}
	}
	if err := s.calibrate(o.calibrate, read, readS2); err != nil {
		return nil, err
	}
	s.spectral(read, readS2)
	if err := s.openMasks(o.masks, o.maskAlign); err != nil {
		return nil, err
	}
	s.setLabel()
	if product != "" {
		s.Label = productLabel(product) + " [" + strings.Join(bandNames(s.Bands), ",") + "]"
		s.noteResampled(paths[ref], o.align)
	}
	return s, nil
}

// noteResampled says which bands were warped onto the grid of the file at
// ref, and how.
func (s *Stack) noteResampled(ref, resampling string) {
	var warped []string
	for _, b := range s.Bands {
		if slices.Contains(s.Aligned, b.Path) {
			warped = append(warped, b.Name)
		}
	}
	if len(warped) == 0 {
		return
	}
	refName := filepath.Base(ref)
	for _, b := range s.Bands {
		if b.Path == ref {
			refName = b.Name
		}
	}
	s.Notes = append(s.Notes, fmt.Sprintf("%s: bands %s resampled (%s) onto the %g m grid of %s", s.Label, strings.Join(warped, ", "), resampling, math.Abs(s.Grid.GeoTransform[1]), refName))
}

// takeGrid gives the stack the grid, block size and metadata of the file at
// path.
func (s *Stack) takeGrid(path string) error {
	ds, err := openDataset(path)
	if err != nil {
		return err
	}
	defer ds.Close(errLogger)
	s.Grid = gridOf(ds)
	st := ds.Structure()
	s.BlockW, s.BlockH = st.BlockSizeX, st.BlockSizeY
	s.Metadata = ds.Metadatas()
	return nil
}

// selectByName returns the 1-based positions of the bands named (any case)
// among all.
func selectByName(all []Band, names []string, paths []string) ([]int, error) {
	var sel []int
	for _, want := range names {
		found := 0
		for i, b := range all {
			if strings.EqualFold(b.Name, want) || (S2BandName(want) != "" && strings.EqualFold(b.Name, S2BandName(want))) {
				found = i + 1
				break
			}
		}
		if found == 0 {
			return nil, specErr(ErrBandRange, "%s: no band named %s (the bands: %s)", strings.Join(paths, ", "), want, strings.Join(bandNames(all), ", "))
		}
		sel = append(sel, found)
	}
	return sel, nil
}

func bandNames(bands []Band) []string {
	out := make([]string, len(bands))
	for i, b := range bands {
		out[i] = b.Name
	}
	return out
}

// productLabel names a product folder (or its metadata file's folder) by
// its folder name without ".SAFE".
func productLabel(path string) string {
	if strings.EqualFold(filepath.Base(path), S2MetadataName) {
		path = filepath.Dir(path)
	}
	return strings.TrimSuffix(filepath.Base(filepath.Clean(path)), ".SAFE")
}

// align warps file i of the stack onto its grid and takes the types and
// nodata read from the warped VRT; overrides are the nodata given for the
// file's (0-based) bands.
func (s *Stack) align(i int, path, resampling string, overrides map[int]float64) error {
	vrt, cleanup, err := alignTo(path, s.Grid, resampling, overrides)
	if err != nil {
		return err
	}
	s.cleanups = append(s.cleanups, cleanup)
	s.sources[i] = vrt
	s.Aligned = append(s.Aligned, path)
	ds, err := openDataset(vrt)
	if err != nil {
		return fmt.Errorf("align %w", err)
	}
	defer ds.Close(errLogger)
	bands := ds.Bands()
	for _, rn := range s.runs {
		if rn.file != i {
			continue
		}
		for k, j := range rn.bands {
			b := &s.Bands[rn.pos+k]
			b.DataType = bands[j].Structure().DataType.String()
			if _, given := overrides[j]; !given {
				b.NoData = nil
				if nd, ok := bands[j].NoData(); ok {
					b.NoData = &nd
				}
			}
		}
	}
	return nil
}

// openMasks checks the mask rules against their files and the stack's
// grid, warping masks on other grids when resampling is set.
func (s *Stack) openMasks(rules []MaskRule, resampling string) error {
	warped := map[string]string{}
	for _, rule := range rules {
		ds, err := openDataset(rule.Path)
		if err != nil {
			return fmt.Errorf("mask %w", err)
		}
		g := gridOf(ds)
		b := ds.Bands()[0]
		nd, hasND := b.NoData()
		test, err := newMaskTest(rule, b.Structure().DataType.String(), nd, hasND)
		ds.Close(errLogger)
		if err != nil {
			return err
		}
		source := rule.Path
		if err := s.Grid.Compare(g); err != nil {
			if resampling == "" {
				return offGrid("mask ", rule.Path, g, s.Paths[0], s.Grid, err)
			}
			if source = warped[rule.Path]; source == "" {
				vrt, cleanup, err := alignTo(rule.Path, s.Grid, resampling, nil)
				if err != nil {
					return fmt.Errorf("mask %w", err)
				}
				s.cleanups = append(s.cleanups, cleanup)
				s.Aligned = append(s.Aligned, rule.Path)
				warped[rule.Path], source = vrt, vrt
			}
		}
		s.MaskRules = append(s.MaskRules, rule)
		s.Masks = append(s.Masks, rule.Path)
		s.maskSources = append(s.maskSources, source)
		s.maskTests = append(s.maskTests, test)
	}
	return nil
}

// Close releases the VRTs of the files warped onto the stack's grid. Close
// the stack's Readers first. A stack from Subset shares its parent's VRTs
// and releases nothing. Close may be called more than once.
func (s *Stack) Close() error {
	if s == nil {
		return nil
	}
	for _, c := range s.cleanups {
		c()
	}
	s.cleanups = nil
	return nil
}

func describeBand(path string, index int, b godal.Band) Band {
	st := b.Structure()
	out := Band{Path: path, Index: index, DataType: st.DataType.String(), Scale: st.Scale, Offset: st.Offset}
	if nd, ok := b.NoData(); ok {
		out.NoData = &nd
	}
	if out.Scale == 0 { // a zero scale would erase the values
		out.Scale = 1
	}
	if st.DataType == godal.Byte && b.Metadata("PIXELTYPE", godal.Domain("IMAGE_STRUCTURE")) == "SIGNEDBYTE" {
		out.DataType = SignedByte // GDAL 3.6's signed byte: read as Int8
	}
	out.Name = strings.TrimSpace(b.Description())
	out.WavelengthNM, out.FWHMNM = bandWavelength(b)
	return out
}

// nameBands names the bands without a description: for two or more
// single-band files, by the part of their stems that tells them apart;
// otherwise "<stem>:<band number>". counts are the bands per file.
func (s *Stack) nameBands(all []Band, counts []int) {
	if len(counts) >= 2 && !slices.ContainsFunc(counts, func(n int) bool { return n != 1 }) {
		stems := make([]string, len(s.Paths))
		for i, p := range s.Paths {
			stems[i] = Stem(p)
		}
		if common, parts, ok := stemParts(stems); ok {
			s.labelCommon, s.parts = common, map[string]string{}
			for i := range all {
				s.parts[all[i].Path] = parts[i]
				if all[i].Name == "" {
					all[i].Name = parts[i]
				}
			}
		}
	}
	for i := range all {
		if all[i].Name == "" {
			all[i].Name = fmt.Sprintf("%s:%d", Stem(all[i].Path), all[i].Index)
		}
	}
}

// setLabel sets Label from the selected bands.
func (s *Stack) setLabel() {
	var names []string
	if s.parts != nil {
		for _, b := range s.Bands {
			names = append(names, s.parts[b.Path])
		}
	}
	s.Label = stackLabel(s.labelCommon, names, s.Paths)
}

// Stem is a file name without folders and extension ("a/b/scene.tif" ->
// "scene"); for GDAL virtual paths the last element is used; for an item
// of a STAC ItemCollection ("coll.json#ID"), its id.
func Stem(path string) string {
	if _, id := splitItemRef(path); id != "" && IsSTAC(path) {
		return id
	}
	base := filepath.Base(path)
	return strings.TrimSuffix(base, filepath.Ext(base))
}

// Len returns the number of selected bands of the stack.
func (s *Stack) Len() int { return len(s.Bands) }

// IntegerBound returns, when every value a Reader's Read gives is an
// integer (bands of integer data types, read unscaled), a bound on their
// magnitude: 2^bits of the widest type. It returns 0 otherwise.
func (s *Stack) IntegerBound() float64 {
	bound := 0.0
	for _, b := range s.Bands {
		bits := integerBits(b.DataType)
		if bits == 0 || b.Scale != 1 || b.Offset != 0 {
			return 0
		}
		bound = max(bound, math.Ldexp(1, bits))
	}
	return bound
}

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

// WithMasks returns a stack of the same files and bands that applies only
// the masks at the given 0-based positions of s.MaskRules (none for an
// empty list): to tell which mask leaves no pixel valid. It shares s's
// warped VRTs: close s, not the copy.
func (s *Stack) WithMasks(positions []int) (*Stack, error) {
	all := make([]int, len(s.Bands))
	for i := range all {
		all[i] = i
	}
	sub, err := s.Subset(all)
	if err != nil {
		return nil, err
	}
	sub.MaskRules, sub.Masks, sub.maskSources, sub.maskTests = nil, nil, nil, nil
	for _, m := range positions {
		if m < 0 || m >= len(s.MaskRules) {
			return nil, specErr(ErrBandRange, "%s: mask %d selected but the stack has %d masks", strings.Join(s.Paths, ", "), m+1, len(s.MaskRules))
		}
		sub.MaskRules = append(sub.MaskRules, s.MaskRules[m])
		sub.Masks = append(sub.Masks, s.Masks[m])
		sub.maskSources = append(sub.maskSources, s.maskSources[m])
		sub.maskTests = append(sub.maskTests, s.maskTests[m])
	}
	return sub, nil
}

// Subset returns a stack of the same files and masks holding only the bands
// at the given 0-based positions of s.Bands, in that order. It shares s's
// warped VRTs: close s, not the subset, when both are done.
func (s *Stack) Subset(positions []int) (*Stack, error) {
	sub := &Stack{Grid: s.Grid, Paths: s.Paths, BlockW: s.BlockW, BlockH: s.BlockH,
		MaskRules: s.MaskRules, Masks: s.Masks, Aligned: s.Aligned, Metadata: s.Metadata,
		sources: s.sources, maskSources: s.maskSources, maskTests: s.maskTests, sideFiles: s.sideFiles,
		parts: s.parts, labelCommon: s.labelCommon}
	fileOf := map[string]int{}
	for i, p := range s.Paths {
		fileOf[p] = i
	}
	for _, pos := range positions {
		if pos < 0 || pos >= len(s.Bands) {
			return nil, specErr(ErrBandRange, "%s: band %d selected but the stack has %d bands", strings.Join(s.Paths, ", "), pos+1, len(s.Bands))
		}
		b := s.Bands[pos]
		sub.addBand(b, fileOf[b.Path])
	}
	sub.setLabel()
	return sub, nil
}
