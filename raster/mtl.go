package raster

import (
	"bytes"
	"cmp"
	"errors"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/airbusgeo/godal"
)

// MTL is the metadata of a Landsat Level-1 product, read from the
// *_MTL.txt file delivered beside its band files. Both the Collection 1 and
// the Collection 2 layouts are read.
type MTL struct {
	Path string
	// SpacecraftID is SPACECRAFT_ID ("LANDSAT_8"), DateAcquired
	// DATE_ACQUIRED ("2013-07-07") and SunElevation SUN_ELEVATION, the
	// sun's elevation at the scene centre in degrees.
	SpacecraftID string
	// SensorID is SENSOR_ID ("OLI_TIRS", "ETM", "TM"); empty in files
	// that lack it.
	SensorID     string
	DateAcquired string
	SunElevation float64
	// ProcessingLevel is PROCESSING_LEVEL (Collection 2) or DATA_TYPE
	// (Collection 1): "L1TP", "L1GT", ... ; "L2SP" for Level-2 products.
	ProcessingLevel string
	// BandFiles maps each band, named as the file names it ("1" ... "11",
	// "6_VCID_1", "QUALITY"), to its file name, from FILE_NAME_BAND_n.
	BandFiles map[string]string
	// ReflMult and ReflAdd are REFLECTANCE_MULT_BAND_n and
	// REFLECTANCE_ADD_BAND_n by band, from the Level-1 rescaling group
	// (RADIOMETRIC_RESCALING in Collection 1, LEVEL1_RADIOMETRIC_RESCALING
	// in Collection 2). Thermal bands have none.
	ReflMult, ReflAdd map[string]float64
	// SRMult and SRAdd are the same keys of a Collection 2 Level-2
	// product's LEVEL2_SURFACE_REFLECTANCE_PARAMETERS group: they turn its
	// surface reflectance band files into surface reflectance.
	SRMult, SRAdd map[string]float64
}

// maxMTLSize bounds the bytes read from a metadata file; real ones are a
// few tens of kilobytes.
const maxMTLSize = 4 << 20

// errNoReflectance marks a band the MTL gives no reflectance coefficients.
var errNoReflectance = errors.New("no reflectance coefficients")

// ReadMTL reads a Landsat *_MTL.txt file: the ODL text of nested
// "GROUP = NAME" ... "END_GROUP = NAME" blocks of "NAME = VALUE" lines,
// closed by "END". SPACECRAFT_ID, DATE_ACQUIRED, SUN_ELEVATION and at least
// one FILE_NAME_BAND_n must be present; errors name the file and the key.
func ReadMTL(path string) (*MTL, error) {
	data, err := readSmallFile(path, maxMTLSize)
	if err != nil {
		return nil, err
	}
	return parseMTL(path, data)
}

func parseMTL(path string, data []byte) (*MTL, error) {
	// entries holds the first value of each name; rescale the first of
	// each name in the Level-1 rescaling group, whose coefficients alone
	// apply to Level-1 digital numbers (a Level-2 file has others).
	entries, rescale, surface := map[string]string{}, map[string]string{}, map[string]string{}
	var groups []string
	for n, line := range bytes.Split(data, []byte("\n")) {
		l := strings.TrimSpace(string(line))
		if l == "" {
			continue
		}
		if l == "END" {
			break
		}
		key, value, ok := strings.Cut(l, "=")
		key, value = strings.TrimSpace(key), unquote(strings.TrimSpace(value))
		if !ok || key == "" {
			return nil, fmt.Errorf("%s: line %d: want NAME = VALUE, got %q", path, n+1, shorten(l))
		}
		switch key {
		case "GROUP":
			groups = append(groups, value)
		case "END_GROUP":
			if len(groups) == 0 || groups[len(groups)-1] != value {
				return nil, fmt.Errorf("%s: line %d: END_GROUP = %s closes no open group of that name", path, n+1, shorten(value))
			}
			groups = groups[:len(groups)-1]
		default:
			if _, seen := entries[key]; !seen {
				entries[key] = value
			}
			if len(groups) > 0 {
				into := map[string]map[string]string{"RADIOMETRIC_RESCALING": rescale, "LEVEL1_RADIOMETRIC_RESCALING": rescale,
					"LEVEL2_SURFACE_REFLECTANCE_PARAMETERS": surface}[groups[len(groups)-1]]
				if _, seen := into[key]; into != nil && !seen {
					into[key] = value
				}
			}
		}
	}
	if len(groups) > 0 {
		return nil, fmt.Errorf("%s: GROUP = %s is not closed", path, shorten(groups[len(groups)-1]))
	}

	m := &MTL{Path: path, BandFiles: map[string]string{}, ReflMult: map[string]float64{}, ReflAdd: map[string]float64{},
		SRMult: map[string]float64{}, SRAdd: map[string]float64{}}
	need := func(key string) (string, error) {
		if v := entries[key]; v != "" {
			return v, nil
		}
		return "", fmt.Errorf("%s: no %s", path, key)
	}
	var err error
	if m.SpacecraftID, err = need("SPACECRAFT_ID"); err != nil {
		return nil, err
	}
	if m.DateAcquired, err = need("DATE_ACQUIRED"); err != nil {
		return nil, err
	}
	se, err := need("SUN_ELEVATION")
	if err != nil {
		return nil, err
	}
	if m.SunElevation, err = mtlNumber(path, "SUN_ELEVATION", se); err != nil {
		return nil, err
	}
	m.SensorID = entries["SENSOR_ID"]
	m.ProcessingLevel = cmp.Or(entries["PROCESSING_LEVEL"], entries["DATA_TYPE"])
	for _, key := range slices.Sorted(maps.Keys(entries)) {
		if band, ok := strings.CutPrefix(key, "FILE_NAME_BAND_"); ok && band != "" {
			m.BandFiles[band] = entries[key]
		}
	}
	if len(m.BandFiles) == 0 {
		return nil, fmt.Errorf("%s: no FILE_NAME_BAND_n", path)
	}
	if err := coefficients(path, rescale, m.ReflMult, m.ReflAdd); err != nil {
		return nil, err
	}
	if err := coefficients(path, surface, m.SRMult, m.SRAdd); err != nil {
		return nil, err
	}
	return m, nil
}

// coefficients reads the REFLECTANCE_MULT_BAND_n and REFLECTANCE_ADD_BAND_n
// entries of one group into mult and add by band.
func coefficients(path string, group map[string]string, mult, add map[string]float64) error {
	for _, key := range slices.Sorted(maps.Keys(group)) {
		for prefix, dst := range map[string]map[string]float64{"REFLECTANCE_MULT_BAND_": mult, "REFLECTANCE_ADD_BAND_": add} {
			if band, ok := strings.CutPrefix(key, prefix); ok && band != "" {
				v, err := mtlNumber(path, key, group[key])
				if err != nil {
					return err
				}
				dst[band] = v
			}
		}
	}
	return nil
}

func mtlNumber(path, key, value string) (float64, error) {
	v, err := strconv.ParseFloat(value, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%s: %s = %s is not a number", path, key, shorten(value))
	}
	return v, nil
}

func unquote(s string) string {
	if len(s) >= 2 && s[0] == '"' && s[len(s)-1] == '"' {
		return s[1 : len(s)-1]
	}
	return s
}

// shorten cuts text quoted from a file for a one-line message.
func shorten(s string) string {
	s = strings.ToValidUTF8(s, "?")
	if r := []rune(s); len(r) > 60 {
		return string(r[:60]) + "..."
	}
	return s
}

// BandOf returns the band whose FILE_NAME_BAND_n is file (a base name;
// letter case is ignored).
func (m *MTL) BandOf(file string) (band string, ok bool) {
	keys := make([]string, 0, len(m.BandFiles))
	for k := range m.BandFiles {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	for _, k := range keys {
		if strings.EqualFold(m.BandFiles[k], file) {
			return k, true
		}
	}
	return "", false
}

// Reflectance returns REFLECTANCE_MULT_BAND_n and REFLECTANCE_ADD_BAND_n of
// band n. A band with neither (a thermal band) gives an error wrapping
// errNoReflectance; one with only one of them names the missing key.
func (m *MTL) Reflectance(band string) (mult, add float64, err error) {
	return pairOf(m.Path, band, m.ReflMult, m.ReflAdd)
}

// pairOf returns band's entries of one group's coefficients.
func pairOf(path, band string, mults, adds map[string]float64) (mult, add float64, err error) {
	mult, okM := mults[band]
	add, okA := adds[band]
	switch {
	case !okM && !okA:
		return 0, 0, fmt.Errorf("%s: band %s: %w", path, band, errNoReflectance)
	case !okM:
		return 0, 0, fmt.Errorf("%s: no REFLECTANCE_MULT_BAND_%s", path, band)
	case !okA:
		return 0, 0, fmt.Errorf("%s: no REFLECTANCE_ADD_BAND_%s", path, band)
	}
	return mult, add, nil
}

// SurfaceReflectance returns the Level-2 REFLECTANCE_MULT_BAND_n and
// REFLECTANCE_ADD_BAND_n of band n, as Reflectance does for Level 1.
func (m *MTL) SurfaceReflectance(band string) (mult, add float64, err error) {
	return pairOf(m.Path, band, m.SRMult, m.SRAdd)
}

// FindMTL returns the *_MTL.txt file in bandPath's folder whose
// FILE_NAME_BAND_n lists bandPath's file name. The error names the folder
// when there is none.
func FindMTL(bandPath string) (string, error) {
	m, err := findMTL(bandPath, ReadMTL)
	if err != nil {
		return "", err
	}
	return m.Path, nil
}

// findMTL is FindMTL reading candidates through read (which may cache).
func findMTL(bandPath string, read func(string) (*MTL, error)) (*MTL, error) {
	dir, base := splitPath(bandPath)
	names, err := listDir(dir)
	if err != nil {
		return nil, fmt.Errorf("find the MTL file of %s: %w", bandPath, err)
	}
	var candidates int
	var firstErr error
	for _, name := range names {
		if !strings.HasSuffix(strings.ToUpper(name), "_MTL.TXT") {
			continue
		}
		candidates++
		m, err := read(joinPath(dir, name))
		if err != nil {
			firstErr = cmp.Or(firstErr, err)
			continue
		}
		if _, ok := m.BandOf(base); ok {
			return m, nil
		}
	}
	switch {
	case candidates == 0:
		return nil, fmt.Errorf("no *_MTL.txt metadata file in folder %s (needed to calibrate %s)", dir, base)
	case firstErr != nil:
		return nil, fmt.Errorf("no *_MTL.txt in folder %s lists %s as a band file (FILE_NAME_BAND_n); one could not be read: %w", dir, base, firstErr)
	}
	return nil, fmt.Errorf("no *_MTL.txt in folder %s lists %s as a band file (FILE_NAME_BAND_n)", dir, base)
}

// splitPath splits a path into its folder and file name. GDAL virtual
// paths are cut at the last '/' and kept as they are: cleaning them would
// turn "/vsizip//abs/a.zip" into a relative path.
func splitPath(p string) (dir, base string) {
	if IsVirtual(p) {
		i := strings.LastIndexByte(p, '/')
		return p[:i], p[i+1:]
	}
	return filepath.Dir(p), filepath.Base(p)
}

func joinPath(dir, name string) string {
	if IsVirtual(dir) {
		return strings.TrimSuffix(dir, "/") + "/" + name
	}
	return filepath.Join(dir, name)
}

// listDir lists the names in a folder, local or GDAL virtual, sorted.
func listDir(dir string) ([]string, error) {
	if IsVirtual(dir) {
		names := slices.DeleteFunc(vsiReadDir(dir), func(n string) bool { return n == "." || n == ".." })
		slices.Sort(names)
		return names, nil
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var names []string
	for _, e := range entries {
		if !e.IsDir() {
			names = append(names, e.Name())
		}
	}
	return names, nil
}

// readSmallFile reads at most limit bytes of a local or GDAL virtual file;
// a longer file is an error.
func readSmallFile(p string, limit int64) ([]byte, error) {
	var r io.Reader
	if IsVirtual(p) {
		f, err := godal.VSIOpen(p, errLogger)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", p, ErrNotFound)
		}
		defer f.Close()
		r = f
	} else {
		f, err := os.Open(p)
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s: %w", p, ErrNotFound)
		} else if err != nil {
			return nil, err
		}
		defer f.Close()
		r = f
	}
	data, err := io.ReadAll(io.LimitReader(r, limit+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", p, err)
	}
	if int64(len(data)) > limit {
		return nil, fmt.Errorf("%s: larger than %d bytes, not a metadata file", p, limit)
	}
	return data, nil
}
