package raster

import (
	"encoding/xml"
	"errors"
	"fmt"
	"maps"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
)

// The Sentinel-2 Level-2A product as ESA delivers it (a folder
// S2x_MSIL2A_..._N05xx_....SAFE): the metadata file MTD_MSIL2A.xml at its
// root and the band files under GRANULE/<granule>/IMG_DATA/R10m, R20m and
// R60m, named <tile>_<sensing time>_<band>_<resolution>.jp2. The element
// names read here follow ESA's Sentinel-2 Products Specification Document
// (S2-PDGS-TAS-DI-PSD), Level-2A user product, as GDAL's SENTINEL2 driver
// reads them too; bottom-of-atmosphere reflectance is
//
//	rho = (DN + BOA_ADD_OFFSET) / BOA_QUANTIFICATION_VALUE
//
// with the per-band additive offset (-1000) introduced by processing
// baseline 04.00 and absent (zero) before it (ESA, "Sentinel-2 L2A
// product format specification", processing baseline 04.00 notes).

// S2Metadata is what bandfold reads of a Level-2A product's MTD_MSIL2A.xml.
type S2Metadata struct {
	// Path is the metadata file, Root the product folder holding it.
	Path, Root string
	// Spacecraft is SPACECRAFT_NAME ("Sentinel-2A"), SensingStart
	// DATATAKE_SENSING_START (or PRODUCT_START_TIME) as written.
	Spacecraft, SensingStart string
	// Baseline is PROCESSING_BASELINE ("05.09").
	Baseline string
	// Quantification is BOA_QUANTIFICATION_VALUE.
	Quantification float64
	// Bands are the product's spectral bands by file-name band ("B02",
	// "B8A"), with their BOA_ADD_OFFSET (0 where the product gives none).
	Bands map[string]S2Band
	// Images are the IMAGE_FILE entries: band files relative to Root,
	// without their extension.
	Images []string
}

// S2Band is one spectral band of a Sentinel-2 product.
type S2Band struct {
	// ID is the band's bandId (0-12); Offset its BOA_ADD_OFFSET.
	ID     int
	Offset float64
	// Resolution is the band's native resolution in metres.
	Resolution int
	// Range is the band's wavelength range (MIN to MAX) and CentreNM its
	// CENTRAL wavelength, in nanometres.
	Range    SpectralRange
	CentreNM float64
}

// S2DefaultBands are the bands a product folder stands for when no band
// is selected: the ten surface bands at 10 and 20 m (the 60 m bands B01,
// B09 and B10 sample the atmosphere).
var S2DefaultBands = []string{"B02", "B03", "B04", "B05", "B06", "B07", "B08", "B8A", "B11", "B12"}

// s2Document is the part of MTD_MSIL2A.xml read; element paths are given
// without their namespace prefix, as encoding/xml matches local names.
type s2Document struct {
	XMLName     xml.Name `xml:"Level-2A_User_Product"`
	ProductInfo struct {
		StartTime string `xml:"PRODUCT_START_TIME"`
		Baseline  string `xml:"PROCESSING_BASELINE"`
		Datatake  struct {
			Spacecraft   string `xml:"SPACECRAFT_NAME"`
			SensingStart string `xml:"DATATAKE_SENSING_START"`
		} `xml:"Datatake"`
		Images []string `xml:"Product_Organisation>Granule_List>Granule>IMAGE_FILE"`
	} `xml:"General_Info>Product_Info"`
	Image struct {
		Quantification string `xml:"QUANTIFICATION_VALUES_LIST>BOA_QUANTIFICATION_VALUE"`
		Offsets        []struct {
			BandID string `xml:"band_id,attr"`
			Value  string `xml:",chardata"`
		} `xml:"BOA_ADD_OFFSET_VALUES_LIST>BOA_ADD_OFFSET"`
		Spectral []struct {
			BandID     string `xml:"bandId,attr"`
			Physical   string `xml:"physicalBand,attr"`
			Resolution string `xml:"RESOLUTION"`
			Min        string `xml:"Wavelength>MIN"`
			Max        string `xml:"Wavelength>MAX"`
			Central    string `xml:"Wavelength>CENTRAL"`
		} `xml:"Spectral_Information_List>Spectral_Information"`
	} `xml:"General_Info>Product_Image_Characteristics"`
}

// S2MetadataName is the name of a Level-2A product's metadata file.
const S2MetadataName = "MTD_MSIL2A.xml"

// ReadS2Metadata reads a Level-2A MTD_MSIL2A.xml. BOA_QUANTIFICATION_VALUE
// and the spectral information must be present; errors name the file and
// the element.
func ReadS2Metadata(path string) (*S2Metadata, error) {
	data, err := readSmallFile(path, maxMTLSize)
	if err != nil {
		return nil, err
	}
	return parseS2Metadata(path, data)
}

func parseS2Metadata(path string, data []byte) (*S2Metadata, error) {
	var doc s2Document
	if err := xml.Unmarshal(data, &doc); err != nil {
		return nil, fmt.Errorf("%s: not a Sentinel-2 Level-2A metadata file (%s)", path, xmlProblem(err))
	}
	info := doc.ProductInfo
	m := &S2Metadata{Path: path, Root: filepath.Dir(path), Spacecraft: info.Datatake.Spacecraft, Baseline: info.Baseline,
		SensingStart: firstNonEmpty(info.Datatake.SensingStart, info.StartTime), Bands: map[string]S2Band{}, Images: info.Images}
	var err error
	if m.Quantification, err = s2Number(path, "BOA_QUANTIFICATION_VALUE", doc.Image.Quantification); err != nil {
		return nil, err
	}
	if m.Quantification <= 0 {
		return nil, fmt.Errorf("%s: BOA_QUANTIFICATION_VALUE = %g: want a positive number", path, m.Quantification)
	}
	offsets := map[int]float64{}
	for _, o := range doc.Image.Offsets {
		id, err := strconv.Atoi(strings.TrimSpace(o.BandID))
		if err != nil {
			return nil, fmt.Errorf("%s: BOA_ADD_OFFSET band_id %q is not a band number", path, shorten(o.BandID))
		}
		if offsets[id], err = s2Number(path, "BOA_ADD_OFFSET", o.Value); err != nil {
			return nil, err
		}
	}
	for _, sp := range doc.Image.Spectral {
		if err := m.addBand(sp.BandID, sp.Physical, sp.Resolution, sp.Min, sp.Max, sp.Central, offsets); err != nil {
			return nil, err
		}
	}
	if len(m.Bands) == 0 {
		return nil, fmt.Errorf("%s: no Spectral_Information", path)
	}
	return m, nil
}

// addBand records one Spectral_Information element.
func (m *S2Metadata) addBand(id, physical, resolution, lo, hi, centre string, offsets map[int]float64) error {
	n, err := strconv.Atoi(strings.TrimSpace(id))
	if err != nil {
		return fmt.Errorf("%s: Spectral_Information bandId %q is not a band number", m.Path, shorten(id))
	}
	name := S2BandName(physical)
	if name == "" {
		return fmt.Errorf("%s: Spectral_Information physicalBand %q is not a Sentinel-2 band", m.Path, shorten(physical))
	}
	b := S2Band{ID: n, Offset: offsets[n]}
	values := []*float64{&b.Range.LoNM, &b.Range.HiNM, &b.CentreNM}
	for i, v := range []string{lo, hi, centre} {
		if *values[i], err = s2Number(m.Path, "Wavelength of "+name, v); err != nil {
			return err
		}
	}
	res, err := s2Number(m.Path, "RESOLUTION of "+name, resolution)
	if err != nil {
		return err
	}
	b.Resolution = int(res)
	m.Bands[name] = b
	return nil
}

// S2BandName turns a physicalBand ("B2", "B8A") or a file-name band
// ("B02") into the file-name form ("B02", "B8A"); "" when it is none.
func S2BandName(s string) string {
	s = strings.ToUpper(strings.TrimSpace(s))
	if s == "B8A" {
		return s
	}
	n, err := strconv.Atoi(strings.TrimPrefix(s, "B"))
	if !strings.HasPrefix(s, "B") || err != nil || n < 1 || n > 12 {
		return ""
	}
	return fmt.Sprintf("B%02d", n)
}

func s2Number(path, element, value string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(value), 64)
	if err != nil || v != v {
		if strings.TrimSpace(value) == "" {
			return 0, fmt.Errorf("%s: no %s", path, element)
		}
		return 0, fmt.Errorf("%s: %s = %s is not a number", path, element, shorten(value))
	}
	return v, nil
}

func firstNonEmpty(values ...string) string {
	for _, v := range values {
		if v = strings.TrimSpace(v); v != "" {
			return v
		}
	}
	return ""
}

// xmlProblem says what encoding/xml found wrong, without its package's
// wording of types.
func xmlProblem(err error) string {
	var syn *xml.SyntaxError
	if errors.As(err, &syn) {
		return fmt.Sprintf("XML error at line %d: %s", syn.Line, syn.Msg)
	}
	if strings.Contains(err.Error(), "expected element type") {
		return "its root element is not Level-2A_User_Product"
	}
	return "unreadable XML"
}

// s2FileBand matches a Level-2A band file name: the band and its
// resolution ("T33UUP_20230614T100559_B02_10m.jp2").
var s2FileBand = regexp.MustCompile(`(?i)_(B[0-9]{2}|B8A|SCL|AOT|WVP|TCI)_([0-9]+)m\.(jp2|tif+)$`)

// S2FileBand returns the band and resolution a Level-2A band file's name
// gives; ok is false for other names.
func S2FileBand(path string) (band string, resolution int, ok bool) {
	m := s2FileBand.FindStringSubmatch(filepath.Base(path))
	if m == nil {
		return "", 0, false
	}
	res, _ := strconv.Atoi(m[2])
	return strings.ToUpper(m[1]), res, true
}

// FindS2Metadata returns the MTD_MSIL2A.xml of the product a band file
// belongs to, walking up from the file's folder to the product folder (at
// most four levels: R10m, IMG_DATA, the granule, GRANULE). ok is false when
// the file is not named as a Level-2A band file or no metadata is found.
func FindS2Metadata(bandPath string, read func(string) (*S2Metadata, error)) (m *S2Metadata, ok bool, err error) {
	if _, _, named := S2FileBand(bandPath); !named || IsVirtual(bandPath) {
		return nil, false, nil
	}
	dir := filepath.Dir(bandPath)
	for range 5 {
		candidate := filepath.Join(dir, S2MetadataName)
		if _, statErr := os.Stat(candidate); statErr == nil {
			m, err := read(candidate)
			return m, err == nil, err
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			break
		}
		dir = parent
	}
	return nil, false, nil
}

// s2Cache reads each product's metadata once.
func s2Cache() func(string) (*S2Metadata, error) {
	cache := map[string]*S2Metadata{}
	return func(p string) (*S2Metadata, error) {
		if m, ok := cache[p]; ok {
			return m, nil
		}
		m, err := ReadS2Metadata(p)
		if err == nil {
			cache[p] = m
		}
		return m, err
	}
}

// IsS2Product reports whether path names a Level-2A product: its folder
// (holding MTD_MSIL2A.xml) or that file itself.
func IsS2Product(path string) bool {
	if IsVirtual(path) {
		return false
	}
	if strings.EqualFold(filepath.Base(path), S2MetadataName) {
		return true
	}
	fi, err := os.Stat(path)
	if err != nil || !fi.IsDir() {
		return false
	}
	_, err = os.Stat(filepath.Join(path, S2MetadataName))
	return err == nil
}

// S2ProductFiles returns the band files of the Level-2A product at path
// (its folder or its MTD_MSIL2A.xml) for the bands named (S2DefaultBands
// when none), in that order, each at its finest resolution, and the index of
// the first file at the finest resolution among them: the grid the others
// are aligned onto.
func S2ProductFiles(path string, bands []string) (files []string, finest int, err error) {
	mtd := path
	if !strings.EqualFold(filepath.Base(path), S2MetadataName) {
		mtd = filepath.Join(path, S2MetadataName)
	}
	m, err := ReadS2Metadata(mtd)
	if err != nil {
		return nil, 0, err
	}
	if len(bands) == 0 {
		bands = S2DefaultBands
	}
	best := 0
	for i, want := range bands {
		file, res, err := m.bandFile(want)
		if err != nil {
			return nil, 0, err
		}
		if i == 0 || res < best {
			best, finest = res, i
		}
		files = append(files, file)
	}
	return files, finest, nil
}

// bandFile finds the file of band (any case, "B2" or "B02", or "SCL") at
// its finest resolution among the product's IMAGE_FILE entries.
func (m *S2Metadata) bandFile(band string) (string, int, error) {
	name := S2BandName(band)
	if name == "" {
		name = strings.ToUpper(band)
	}
	best, bestRes := "", 0
	for _, img := range m.Images {
		for _, ext := range []string{".jp2", ".tif"} {
			b, res, ok := S2FileBand(img + ext)
			if !ok || b != name || (best != "" && res >= bestRes) {
				continue
			}
			if p := filepath.Join(m.Root, filepath.FromSlash(img)+ext); fileExists(p) {
				best, bestRes = p, res
			}
		}
	}
	if best == "" {
		known := slices.Sorted(maps.Keys(m.Bands))
		return "", 0, specErr(ErrBandRange, "%s lists no band file of %s that exists (its bands: %s, and SCL)", m.Path, band, strings.Join(known, ", "))
	}
	return best, bestRes, nil
}

func fileExists(p string) bool {
	fi, err := os.Stat(p)
	return err == nil && !fi.IsDir()
}

// AuxSidecar returns GDAL's .aux.xml sidecar of the raster at path (where
// GDAL keeps what the format has no place for: class names and colours,
// wavelengths), and whether there is one.
func AuxSidecar(path string) (string, bool) {
	aux := path + ".aux.xml"
	return aux, fileExists(aux)
}

// s2Spectral names a Sentinel-2 Level-2A band file's band as the product
// does ("B02") and gives it the product's wavelengths; false for other
// files.
func (s *Stack) s2Spectral(b *Band, readS2 func(string) (*S2Metadata, error)) bool {
	m, ok, err := FindS2Metadata(b.Path, readS2)
	if err != nil || !ok || b.Index != 1 {
		return false
	}
	name, _, _ := S2FileBand(b.Path)
	s.addSideFile(m.Path)
	b.Name = name
	band, ok := m.Bands[name]
	if !ok {
		return true // SCL, AOT ...: named, no wavelength
	}
	b.Range, b.WavelengthNM, b.FWHMNM = band.Range, band.CentreNM, band.Range.HiNM-band.Range.LoNM
	b.Product = strings.TrimSpace(m.Spacecraft + " MSI band " + name)
	return true
}

// productNoData gives the bands of Sentinel-2 Level-2A band files without
// a nodata value of their own the product's NODATA value, 0 (ESA's
// Level-2A format: Special_Values NODATA = 0), as --nodata would, so that
// alignment and reading skip the pixels outside the swath.
func (s *Stack) productNoData(overrides []map[int]float64, fileOf, sel []int, readS2 func(string) (*S2Metadata, error)) {
	for k, n := range sel {
		b := &s.Bands[k]
		if b.NoData != nil {
			continue
		}
		if _, ok, err := FindS2Metadata(b.Path, readS2); err != nil || !ok {
			continue
		}
		zero := 0.0
		b.NoData = &zero
		f := fileOf[n-1]
		if overrides[f] == nil {
			overrides[f] = map[int]float64{}
		}
		overrides[f][b.Index-1] = 0
	}
}

// nameProductBands names the bands of Sentinel-2 Level-2A band files as the
// product does ("B02", "SCL"), so that they can be selected by name.
func (s *Stack) nameProductBands(all []Band, readS2 func(string) (*S2Metadata, error)) {
	for i := range all {
		if name, _, ok := S2FileBand(all[i].Path); ok && all[i].Index == 1 {
			if _, found, err := FindS2Metadata(all[i].Path, readS2); err == nil && found {
				all[i].Name = name
			}
		}
	}
}
