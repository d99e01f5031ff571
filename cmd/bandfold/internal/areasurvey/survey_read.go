package areasurvey

import (
	"encoding/json"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"bandfold/raster"
	"bandfold/raster/output"
)

// surveyFile is a labelled survey read from its GeoPackage or its CSV: the
// points, where each lies in the file (for messages), how exactly each
// point's weight is written (half a unit of its last digit; 0 when read
// as a number), and the strata as drawn, from the survey's metadata.
type surveyFile struct {
	path   string
	pts    *raster.Points
	where  []string
	tol    []float64
	strata []SurveyStratum
}

// area is the stratum's area in the survey's area unit: m² on the ground,
// else its pixel count.
func (s SurveyStratum) area() float64 {
	if s.AreaM2 != nil {
		return *s.AreaM2
	}
	return float64(s.Pixels)
}

// readSurvey reads the survey at path (survey.csv by its extension, else
// the GeoPackage) and the strata its metadata records, which it checks.
func readSurvey(path string) (*surveyFile, error) {
	var s *surveyFile
	if strings.EqualFold(filepath.Ext(path), ".csv") {
		data, err := output.ReadInput(path)
		if err != nil {
			return nil, fmt.Errorf("survey %w", err)
		}
		if s, err = parseSurveyCSV(path, data); err != nil {
			return nil, err
		}
		if s.strata == nil {
			s.strata = strataBeside(path, s.pts.Metadata[MdFingerprint])
		}
	} else {
		pts, err := raster.ReadPoints(path)
		if err != nil {
			return nil, err
		}
		s = &surveyFile{path: path, pts: pts, tol: make([]float64, len(pts.Points))}
		for i := range pts.Points {
			s.where = append(s.where, fmt.Sprintf("feature %d", i+1))
		}
		if raw, ok := pts.Metadata[mdStrata]; ok && json.Unmarshal([]byte(raw), &s.strata) != nil {
			return nil, fmt.Errorf("survey %s: its record of the strata drawn (layer metadata %s) is damaged: draw the survey again", path, mdStrata)
		}
	}
	if err := s.checkStrata(); err != nil {
		return nil, err
	}
	return s, nil
}

// strataBeside returns the strata recorded by the GeoPackage drawn with a
// survey.csv whose first line does not record them (written before it
// did), when that GeoPackage lies beside it with the same fingerprint.
func strataBeside(csvPath, fingerprint string) []SurveyStratum {
	pts, err := raster.ReadPoints(strings.TrimSuffix(csvPath, filepath.Ext(csvPath)) + ".gpkg")
	if err != nil || fingerprint == "" || pts.Metadata[MdFingerprint] != fingerprint {
		return nil
	}
	var strata []SurveyStratum
	if json.Unmarshal([]byte(pts.Metadata[mdStrata]), &strata) != nil {
		return nil
	}
	return strata
}

// checkStrata refuses a survey whose metadata does not record the strata
// drawn or records strata no draw makes; it sets each stratum's map class.
func (s *surveyFile) checkStrata() error {
	if len(s.strata) == 0 {
		return fmt.Errorf("survey %s does not record the strata it was drawn from (their areas and the points drawn in each), which the estimate takes from it, nor lies beside the GeoPackage drawn with it: draw the survey again", s.path)
	}
	var seen []string
	for i, st := range s.strata {
		h := slices.Index(stratumNames, st.Name)
		a := st.area()
		why := ""
		switch {
		case h < 0:
			why = fmt.Sprintf("no survey draws a stratum %q", st.Name)
		case slices.Contains(seen, st.Name):
			why = fmt.Sprintf("stratum %q is listed twice", st.Name)
		case st.Pixels < 1 || st.Points < 1 || st.Points > st.Pixels:
			why = fmt.Sprintf("stratum %q has %d points drawn from %d pixels", st.Name, st.Points, st.Pixels)
		case math.IsNaN(a) || math.IsInf(a, 0) || a <= 0:
			why = fmt.Sprintf("stratum %q has an area of %g", st.Name, a)
		}
		if why != "" {
			return fmt.Errorf("survey %s: its record of the strata drawn is damaged (%s): draw the survey again", s.path, why)
		}
		seen = append(seen, st.Name)
		s.strata[i].MapClass = stratumClass[h]
	}
	return nil
}

// drawn is the number of points the survey drew.
func (s *surveyFile) drawn() int {
	n := 0
	for _, st := range s.strata {
		n += st.Points
	}
	return n
}

// checkRows refuses points the draw cannot have written: a stratum or map
// class it did not draw, an id outside 1..drawn or seen before, a weight
// other than its stratum's area over the points drawn in it (to the
// precision it is written in), more points in a stratum than were drawn.
// It returns the ids of drawn points missing from the file.
func (s *surveyFile) checkRows() (missing []int, err error) {
	present := make([]int, len(s.strata))
	first := make(map[int]int, len(s.pts.Points))
	for i, p := range s.pts.Points {
		at := fmt.Sprintf("survey %s %s (point %d)", s.path, s.where[i], p.ID)
		h := slices.IndexFunc(s.strata, func(st SurveyStratum) bool { return st.Name == p.Stratum })
		switch {
		case h < 0 || s.strata[h].MapClass != p.MapClass:
			return nil, fmt.Errorf("%s: stratum %q with map class %q is not one the survey drew (%s)", at, p.Stratum, p.MapClass, s.strataNames())
		case p.ID < 1 || p.ID > s.drawn():
			return nil, fmt.Errorf("%s: id %d is not one of the points drawn (1 to %d)", at, p.ID, s.drawn())
		}
		if j, dup := first[p.ID]; dup {
			return nil, fmt.Errorf("%s: point %d appears again (first at %s): each drawn point may appear once", at, p.ID, s.where[j])
		}
		first[p.ID] = i
		st := s.strata[h]
		want := st.area() / float64(st.Points)
		if !(math.Abs(p.Weight-want) <= s.tol[i]+1e-9*want) {
			got := "weight " + strconv.FormatFloat(p.Weight, 'g', -1, 64)
			if math.IsNaN(p.Weight) || p.Weight == 0 {
				got = "no weight (empty, 0 or not a number)" // a GeoPackage stores a NaN as empty, read as 0
			}
			return nil, fmt.Errorf("%s: %s, but each point of stratum %q weighs %s (its area over the %d points drawn in it): restore the weight drawn",
				at, got, st.Name, strconv.FormatFloat(want, 'g', -1, 64), st.Points)
		}
		present[h]++
	}
	for h, st := range s.strata {
		if present[h] > st.Points {
			return nil, fmt.Errorf("survey %s holds %d points of stratum %q, but %d were drawn", s.path, present[h], st.Name, st.Points)
		}
	}
	missing = []int{}
	for id := 1; id <= s.drawn(); id++ {
		if _, ok := first[id]; !ok {
			missing = append(missing, id)
		}
	}
	return missing, nil
}

// strataNames lists the survey's strata for messages.
func (s *surveyFile) strataNames() string {
	var parts []string
	for _, st := range s.strata {
		parts = append(parts, fmt.Sprintf("%q (map class %q)", st.Name, st.MapClass))
	}
	return strings.Join(parts, ", ")
}

// idList shows ids for a message: the first few and how many more.
func idList(ids []int) string {
	const show = 5
	var parts []string
	for _, id := range ids[:min(show, len(ids))] {
		parts = append(parts, strconv.Itoa(id))
	}
	if len(ids) > show {
		return fmt.Sprintf("ids %s and %d more", strings.Join(parts, ", "), len(ids)-show)
	}
	return "ids " + strings.Join(parts, ", ")
}
