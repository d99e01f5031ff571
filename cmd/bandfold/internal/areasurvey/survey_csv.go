package areasurvey

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
)

// csvFields are the columns of survey.csv, the GeoPackage's fields.
var csvFields = []string{"id", "stratum", "map_class", "x", "y", "lon", "lat", "weight", "reference"}

// csvMark starts the first line of survey.csv, which carries the layer
// metadata the estimate needs (key=value pairs separated by "; ").
const csvMark = "# bandfold survey"

// WriteSurveyCSV renders the survey's points as CSV: a first comment line
// with the map's fingerprint, the area unit and the caution, then the
// fields.
func WriteSurveyCSV(pts *raster.Points) []byte {
	var buf bytes.Buffer
	fmt.Fprintf(&buf, "%s; fingerprint=%s; area_unit=%s; %s\n", csvMark, pts.Metadata[MdFingerprint], pts.Metadata[mdAreaUnit], jobkit.Caution)
	w := csv.NewWriter(&buf)
	w.Write(csvFields)
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
	for _, p := range pts.Points {
		w.Write([]string{strconv.Itoa(p.ID), p.Stratum, p.MapClass, f(p.X), f(p.Y), f(p.Lon), f(p.Lat), f(p.Weight), p.Reference})
	}
	w.Flush()
	return buf.Bytes()
}

// readSurveyCSV reads survey.csv (as written by survey draw, labelled in a
// spreadsheet): the metadata line and the fields by header name.
func readSurveyCSV(path string) (*raster.Points, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("survey %s: %w", path, err)
	}
	pts := &raster.Points{Metadata: map[string]string{}}
	first, rest, _ := bytes.Cut(data, []byte("\n"))
	line := strings.Trim(strings.TrimSpace(string(first)), `",`)
	if !strings.HasPrefix(line, csvMark) {
		return nil, fmt.Errorf("survey %s: the first line is not %q with the map's fingerprint", path, csvMark)
	}
	for _, part := range strings.Split(line, "; ") {
		if k, v, ok := strings.Cut(part, "="); ok {
			switch k {
			case "fingerprint":
				pts.Metadata[MdFingerprint] = v
			case "area_unit":
				pts.Metadata[mdAreaUnit] = v
			}
		}
	}
	r := csv.NewReader(bytes.NewReader(rest))
	r.FieldsPerRecord = -1
	header, err := r.Read()
	if err != nil {
		return nil, fmt.Errorf("survey %s: no header: %w", path, err)
	}
	col := map[string]int{}
	for i, h := range header {
		col[strings.TrimSpace(h)] = i
	}
	for _, name := range csvFields {
		if _, ok := col[name]; !ok {
			if name == "reference" {
				return nil, fmt.Errorf("survey %s %w", path, raster.ErrNoReference)
			}
			return nil, fmt.Errorf("survey %s has no %s column", path, name)
		}
	}
	for line := 3; ; line++ {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("survey %s: %w", path, err)
		}
		get := func(name string) string {
			if i := col[name]; i < len(rec) {
				return strings.TrimSpace(rec[i])
			}
			return ""
		}
		id, err1 := strconv.Atoi(get("id"))
		w, err2 := strconv.ParseFloat(get("weight"), 64)
		if err1 != nil || err2 != nil {
			return nil, fmt.Errorf("survey %s line %d: id %q or weight %q is not a number", path, line, get("id"), get("weight"))
		}
		x, _ := strconv.ParseFloat(get("x"), 64)
		y, _ := strconv.ParseFloat(get("y"), 64)
		pts.Points = append(pts.Points, raster.Point{ID: id, Stratum: get("stratum"), MapClass: get("map_class"), X: x, Y: y, Weight: w, Reference: get("reference")})
	}
	return pts, nil
}
