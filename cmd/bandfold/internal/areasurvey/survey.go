package areasurvey

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/transform/survey"
)

// Survey strata and map classes by name, indexed by the raster.Stratum*
// codes.
var (
	stratumNames = []string{"no change", "change", "near change"}
	stratumClass = []string{"no change", "change", "no change"}
	// surveyClasses are the map and reference classes of an estimate, in
	// order.
	surveyClasses = []string{"change", "no change"}
)

// Layer metadata keys of a survey.
const (
	MdFingerprint = "BANDFOLD_SURVEY_FINGERPRINT"
	mdMap         = "BANDFOLD_SURVEY_MAP"
	mdDesign      = "BANDFOLD_SURVEY_DESIGN"
	mdStrata      = "BANDFOLD_SURVEY_STRATA"
	mdAreaUnit    = "BANDFOLD_SURVEY_AREA_UNIT"
	mdCaution     = "BANDFOLD_CAUTION"
)

// SurveyDrawOptions are the options of SurveyDraw.
type SurveyDrawOptions struct {
	// Dir is a change output folder (its change.tif is the map), or Map a
	// classified raster (0 no change, other values change).
	Dir, Map string
	// Out is the GeoPackage; survey CSV goes beside it with the same stem.
	Out           string
	Points        int
	Buffer        string
	MinPerStratum int
	// TargetSE with ExpectedAccuracy (by class or stratum name) sizes the
	// sample by Cochran's formula instead of Points.
	TargetSE         float64
	ExpectedAccuracy map[string]float64
	Seed             uint64
	Overwrite        bool
}

// SurveyStratum describes one stratum of a survey.
type SurveyStratum struct {
	Name     string   `json:"stratum"`
	MapClass string   `json:"map_class"`
	Pixels   int      `json:"pixels"`
	AreaM2   *float64 `json:"area_m2"`
	AreaHa   *float64 `json:"area_ha"`
	Points   int      `json:"points"`
	Weight   float64  `json:"weight"`
}

// SurveyDrawResult describes a drawn survey.
type SurveyDrawResult struct {
	Map          string          `json:"map"`
	Fingerprint  string          `json:"fingerprint"`
	Design       string          `json:"design"`
	Points       int             `json:"points"`
	BufferPixels float64         `json:"buffer_pixels"`
	Strata       []SurveyStratum `json:"strata"`
	Outputs      []string        `json:"outputs"`
	Caution      string          `json:"caution"`
}

// ParseBuffer reads --buffer: "0", "3" or "3px" (pixels), "30m".
func ParseBuffer(s string) (raster.Buffer, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	b := raster.Buffer{}
	num := t
	if v, ok := strings.CutSuffix(t, "px"); ok {
		num = v
	} else if v, ok := strings.CutSuffix(t, "m"); ok {
		num, b.Metres = v, true
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
	if t == "" || err != nil || v < 0 || math.IsInf(v, 0) || math.IsNaN(v) {
		return b, jobkit.Usagef("--buffer %q: want a distance in px or m (for example 3px or 30m), or 0", s)
	}
	b.Value = v
	return b, nil
}

// mapOf returns the map a survey concerns: --map, or DIR's change.tif.
func mapOf(dir, mapFile string) string {
	if mapFile != "" {
		return mapFile
	}
	if fi, err := os.Stat(dir); err == nil && !fi.IsDir() {
		return dir
	}
	return filepath.Join(dir, "change.tif")
}

// Fingerprint identifies a map file by the SHA-256 of its bytes.
func Fingerprint(path string) (string, error) {
	f, err := os.Open(path)
	if pe := (*fs.PathError)(nil); errors.As(err, &pe) {
		err = pe.Err // the path is in the message already
	}
	if err != nil {
		return "", fmt.Errorf("map %s: %w", path, err)
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("read %s: %w", path, err)
	}
	return "sha256:" + hex.EncodeToString(h.Sum(nil)), nil
}

// csvBeside is the survey CSV written beside a GeoPackage.
func csvBeside(gpkg string) string {
	return strings.TrimSuffix(gpkg, filepath.Ext(gpkg)) + ".csv"
}

// SurveyDraw draws a stratified random sample of a change map's pixels for
// an interpreter to label, and writes it as a GeoPackage point layer and a
// CSV file.
func SurveyDraw(_ context.Context, _ jobkit.Env, o SurveyDrawOptions) (_ *SurveyDrawResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	buf, err := checkDraw(&o)
	if err != nil {
		return nil, err
	}
	mapPath := mapOf(o.Dir, o.Map)
	csvPath := csvBeside(o.Out)
	outs := []output.Path{{Role: "survey", Path: o.Out}, {Role: "survey CSV", Path: csvPath}}
	if err := checkOutputs([]output.Path{{Role: "map", Path: mapPath}}, outs, o.Overwrite); err != nil {
		return nil, err
	}
	fp, err := Fingerprint(mapPath)
	if err != nil {
		return nil, err
	}
	st, err := raster.ReadStrata(mapPath, buf)
	if errors.Is(err, raster.ErrNoCRS) {
		return nil, jobkit.Usage(err)
	}
	if err != nil {
		return nil, err
	}
	sizes, design, err := allocate(st, o)
	if err != nil {
		return nil, err
	}
	pts, res, err := drawPoints(st, sizes, o.Seed)
	if err != nil {
		return nil, err
	}
	res.Map, res.Fingerprint, res.Design, res.BufferPixels, res.Caution = mapPath, fp, design, st.BufferPixels, jobkit.Caution
	strata, err := json.Marshal(res.Strata)
	if err != nil {
		return nil, fmt.Errorf("survey of %s: the strata's areas are not finite numbers", mapPath)
	}
	unit := "m2"
	if !st.Ground {
		unit = "px"
	}
	pts.Metadata = map[string]string{MdFingerprint: fp, mdMap: jobkit.DocPaths{Dir: filepath.Dir(o.Out)}.Input(mapPath), mdDesign: design, mdStrata: string(strata), mdAreaUnit: unit, mdCaution: jobkit.Caution}
	if err := writeSurvey(o.Out, csvPath, pts, o.Overwrite); err != nil {
		return nil, err
	}
	res.Outputs = []string{o.Out, csvPath}
	return res, nil
}

// writeSurvey writes the GeoPackage and the CSV of a survey, both under
// temporary names first, so that a failure leaves neither.
func writeSurvey(gpkg, csvPath string, pts *raster.Points, overwrite bool) error {
	g, err := raster.CreatePoints(gpkg, pts, overwrite)
	if err != nil {
		return err
	}
	defer g.Abort()
	c, err := output.Create(csvPath, overwrite, "")
	if err != nil {
		return err
	}
	defer c.Abort()
	if err := os.WriteFile(c.Temp(), WriteSurveyCSV(pts), 0o666); err != nil {
		return fmt.Errorf("write %s: %w", csvPath, err)
	}
	if err := g.Commit(); err != nil {
		return err
	}
	if err := c.Commit(); err != nil {
		if !overwrite {
			os.Remove(gpkg)
		}
		return err
	}
	return nil
}

// checkOutputs refuses, before any work, outputs that are an input or each
// other (output.Distinct), files that cannot be written (output.Check), and
// the files of a committed output folder, such as a change folder's
// changes.gpkg, which a survey must never replace.
func checkOutputs(inputs, outputs []output.Path, overwrite bool) error {
	if err := output.Distinct(inputs, outputs); err != nil {
		return err
	}
	for _, p := range outputs {
		if err := output.Check(p.Path, overwrite); err != nil {
			return err
		}
		dir, name := filepath.Split(p.Path)
		if listed, ok := output.Listed(filepath.Clean(dir)); ok && slices.Contains(listed, name) {
			return fmt.Errorf("%s %s is a file of the output folder %s (listed in its %s), which the survey must not replace: give another name", p.Role, p.Path, filepath.Clean(dir), output.ManifestName)
		}
	}
	return nil
}

// checkDraw refuses option values that cannot be right (usage errors,
// exit 2) and returns the buffer.
func checkDraw(o *SurveyDrawOptions) (raster.Buffer, error) {
	buf, err := ParseBuffer(o.Buffer)
	if err != nil {
		return buf, err
	}
	switch {
	case o.Out == "":
		return buf, jobkit.Usagef("no output GeoPackage (--out)")
	case !strings.EqualFold(filepath.Ext(o.Out), ".gpkg"):
		return buf, jobkit.Usagef("--out %s: the survey is a GeoPackage, so give a name ending in .gpkg (the CSV is written beside it as %s)", o.Out, filepath.Base(strings.TrimSuffix(o.Out, filepath.Ext(o.Out))+".csv"))
	case o.MinPerStratum < 2:
		return buf, jobkit.Usagef("--min-per-stratum %d: need at least 2", o.MinPerStratum)
	case math.IsNaN(o.TargetSE) || o.TargetSE < 0 || o.TargetSE >= 1:
		return buf, jobkit.Usagef("--target-se %g: want a standard error of a proportion, more than 0 and less than 1", o.TargetSE)
	case o.TargetSE > 0 && o.Points != 0:
		return buf, jobkit.Usagef("--points %d and --target-se %g both set the sample size: give one of them", o.Points, o.TargetSE)
	case o.TargetSE == 0 && o.Points == 0:
		return buf, jobkit.Usagef("no sample size: give --points N, or --target-se with --expected-accuracy")
	case o.TargetSE == 0 && o.Points < 2:
		return buf, jobkit.Usagef("--points %d: need at least 2 per stratum", o.Points)
	case o.TargetSE == 0 && len(o.ExpectedAccuracy) > 0:
		return buf, jobkit.Usagef("--expected-accuracy is used only with --target-se, which sizes the sample from it: give --target-se, or drop --expected-accuracy")
	}
	acc, err := checkAccuracy(o.ExpectedAccuracy)
	o.ExpectedAccuracy = acc
	return buf, err
}

// checkAccuracy refuses classes and strata a survey does not know, and
// values that are not accuracies; it returns the values by their names
// as stratumNames and stratumClass spell them.
func checkAccuracy(in map[string]float64) (map[string]float64, error) {
	out := map[string]float64{}
	for _, k := range slices.Sorted(maps.Keys(in)) {
		name := strings.Join(strings.FieldsFunc(strings.ToLower(k), func(r rune) bool { return r == ' ' || r == '_' || r == '-' }), " ")
		if !slices.Contains(stratumNames, name) {
			return nil, jobkit.Usagef("--expected-accuracy: unknown class %q: want change, no change or near change", k)
		}
		if u := in[k]; !(u > 0 && u <= 1) {
			return nil, jobkit.Usagef("--expected-accuracy %s=%g: want a user's accuracy more than 0 and at most 1", k, u)
		}
		out[name] = in[k]
	}
	return out, nil
}

// allocate sizes the sample of each stratum that has pixels.
func allocate(st *raster.Strata, o SurveyDrawOptions) ([]int, string, error) {
	var areas []float64
	var avail []int
	for h := range st.Counts {
		areas, avail = append(areas, st.Areas[h]), append(avail, st.Counts[h])
	}
	if avail[raster.StratumChange] == 0 {
		return nil, "", fmt.Errorf("map %s has no change pixel to sample", mapOf(o.Dir, o.Map))
	}
	n := o.Points
	design := fmt.Sprintf("stratified random; %%d points, at least %d per stratum, the rest proportional to stratum area (Olofsson et al. 2014); seed %d", o.MinPerStratum, o.Seed)
	if o.TargetSE > 0 {
		var w, acc []float64
		total := 0.0
		for _, a := range areas {
			total += a
		}
		for h := range areas {
			if avail[h] == 0 {
				continue
			}
			u, ok := o.ExpectedAccuracy[stratumNames[h]]
			if !ok {
				u, ok = o.ExpectedAccuracy[stratumClass[h]]
			}
			if !ok {
				return nil, "", jobkit.Usagef("--expected-accuracy: no value for %q (give change=U,no change=U)", stratumNames[h])
			}
			w, acc = append(w, areas[h]/total), append(acc, u)
		}
		n = survey.CochranSize(w, acc, o.TargetSE, st.Counts[0]+st.Counts[1]+st.Counts[2])
		design = fmt.Sprintf("stratified random; %%d points for a standard error of %g of the change proportion (Cochran 1977, eq. 5.25), at least %d per stratum, the rest proportional to stratum area; seed %d", o.TargetSE, o.MinPerStratum, o.Seed)
	}
	// Strata without pixels take no part.
	var idx []int
	var a2 []float64
	var n2 []int
	for h := range areas {
		if avail[h] > 0 {
			idx, a2, n2 = append(idx, h), append(a2, areas[h]), append(n2, avail[h])
		}
	}
	got, err := survey.Allocate(a2, n2, n, o.MinPerStratum)
	if err != nil {
		if o.TargetSE > 0 {
			return nil, "", jobkit.Usagef("--target-se %g with --expected-accuracy gives %d points: %v", o.TargetSE, n, err)
		}
		return nil, "", jobkit.Usagef("--points %d: %v", n, err)
	}
	sizes := make([]int, len(areas))
	for i, h := range idx {
		sizes[h] = got[i]
	}
	return sizes, fmt.Sprintf(design, n), nil
}

// drawPoints draws the sample and describes the strata.
func drawPoints(st *raster.Strata, sizes []int, seed uint64) (*raster.Points, *SurveyDrawResult, error) {
	ranks := survey.Draw(st.Counts[:], sizes, seed)
	pts := &raster.Points{CRS: st.Projection}
	res := &SurveyDrawResult{}
	type pick struct {
		pixel, stratum int
	}
	var picks []pick
	for h := range st.Counts {
		if st.Counts[h] == 0 {
			continue
		}
		for _, p := range st.Pixels(uint8(h), ranks[h]) {
			picks = append(picks, pick{p, h})
		}
		s := SurveyStratum{Name: stratumNames[h], MapClass: stratumClass[h], Pixels: st.Counts[h], Points: sizes[h], Weight: st.Areas[h] / float64(sizes[h])}
		if st.Ground {
			m2, ha := st.Areas[h], st.Areas[h]/1e4
			s.AreaM2, s.AreaHa = &m2, &ha
		}
		res.Strata = append(res.Strata, s)
	}
	// Points in raster order, numbered from 1.
	sort.Slice(picks, func(i, j int) bool { return picks[i].pixel < picks[j].pixel })
	pix := make([]int, len(picks))
	for i, p := range picks {
		pix[i] = p.pixel
	}
	xs, ys, lons, lats, err := raster.PixelCentres(st.Grid, pix)
	if err != nil {
		return nil, nil, err
	}
	for i, p := range picks {
		pts.Points = append(pts.Points, raster.Point{ID: i + 1, Stratum: stratumNames[p.stratum], MapClass: stratumClass[p.stratum],
			X: xs[i], Y: ys[i], Lon: lons[i], Lat: lats[i], Weight: st.Areas[p.stratum] / float64(sizes[p.stratum])})
	}
	res.Points = len(pts.Points)
	return pts, res, nil
}
