package areasurvey

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"regexp"
	"strconv"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
)

// csvFields are the columns of survey.csv, the GeoPackage's fields.
var csvFields = []string{"id", "stratum", "map_class", "x", "y", "lon", "lat", "weight", "reference"}

// csvMark starts the first line of survey.csv, which carries the layer
// metadata the estimate needs (key=value pairs separated by "; ").
const csvMark = "# bandfold survey"

// WriteSurveyCSV renders the survey's points as CSV: a first comment line
// with the map's fingerprint, the area unit, the strata as drawn and the
// caution, then the fields. The strata come from the points' metadata (the
// JSON of the GeoPackage's BANDFOLD_SURVEY_STRATA) and are written as
// strata=NAME:PIXELS:AREA:POINTS|..., the area in the area unit; the line
// holds no comma, so a spreadsheet keeps it in one cell.
func WriteSurveyCSV(pts *raster.Points) []byte {
	var buf bytes.Buffer
	fmt.Fprintf(&buf, "%s; fingerprint=%s; area_unit=%s; ", csvMark, pts.Metadata[MdFingerprint], pts.Metadata[mdAreaUnit])
	var strata []SurveyStratum
	if json.Unmarshal([]byte(pts.Metadata[mdStrata]), &strata) == nil && len(strata) > 0 {
		var parts []string
		for _, s := range strata {
			parts = append(parts, fmt.Sprintf("%s:%d:%s:%d", s.Name, s.Pixels, strconv.FormatFloat(s.area(), 'g', -1, 64), s.Points))
		}
		fmt.Fprintf(&buf, "strata=%s; ", strings.Join(parts, "|"))
	}
	buf.WriteString(jobkit.Caution + "\n")
	w := csv.NewWriter(&buf)
	w.Write(csvFields)
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
	for _, p := range pts.Points {
		w.Write([]string{strconv.Itoa(p.ID), p.Stratum, p.MapClass, f(p.X), f(p.Y), f(p.Lon), f(p.Lat), f(p.Weight), p.Reference})
	}
	w.Flush()
	return buf.Bytes()
}

// parseSurveyCSV reads survey.csv as survey draw wrote it or as a
// spreadsheet saved it once labelled: with or without a UTF-8 byte-order
// mark, with LF, CRLF or CR line ends, its cells separated by commas,
// semicolons or tabs (whichever the header uses) and, when not by commas,
// decimals written with a comma. Rows whose cells are all empty are
// skipped. Whatever it cannot read, it names by line.
func parseSurveyCSV(path string, data []byte) (*surveyFile, error) {
	text, err := csvText(path, data)
	if err != nil {
		return nil, err
	}
	first, rest, _ := strings.Cut(text, "\n")
	s := &surveyFile{path: path, pts: &raster.Points{Metadata: map[string]string{}}}
	if err := s.readMark(first); err != nil {
		return nil, err
	}
	r, col, err := csvHeader(path, rest)
	if err != nil {
		return nil, err
	}
	for {
		rec, err := r.Read()
		if err == io.EOF {
			return s, nil
		}
		if err != nil {
			return nil, csvError(path, err)
		}
		line, _ := r.FieldPos(0)
		if err := s.addRow(rec, col, line+1, r.Comma != ','); err != nil {
			return nil, err
		}
	}
}

// csvText returns data as text with LF or CRLF line ends and without a
// byte-order mark, or says why it is not the text of a CSV file.
func csvText(path string, data []byte) (string, error) {
	if bytes.HasPrefix(data, []byte{0xFF, 0xFE}) || bytes.HasPrefix(data, []byte{0xFE, 0xFF}) {
		return "", fmt.Errorf("survey %s is UTF-16 text (a spreadsheet's \"Unicode text\"): save it as CSV (UTF-8 or plain)", path)
	}
	data = output.StripBOM(data)
	if bytes.IndexByte(data, 0) >= 0 {
		return "", fmt.Errorf("survey %s is not a text file: want the survey.csv that survey draw wrote", path)
	}
	if !bytes.Contains(data, []byte("\n")) {
		data = bytes.ReplaceAll(data, []byte("\r"), []byte("\n")) // line ends of old Mac spreadsheets
	}
	return string(data), nil
}

// readMark reads the first line: the mark, the map's fingerprint, the area
// unit and the strata. A spreadsheet may have quoted the line, split it
// into cells at its semicolons and joined them again with commas or
// semicolons, or padded it with empty cells.
func (s *surveyFile) readMark(line string) error {
	line = strings.Trim(line, " \t\r\",;")
	if !strings.HasPrefix(line, csvMark) {
		return fmt.Errorf("survey %s: the first line is not %q with the map's fingerprint, which survey draw writes", s.path, csvMark)
	}
	md := s.pts.Metadata
	for _, part := range strings.FieldsFunc(line, func(r rune) bool { return r == ';' || r == ',' || r == '\t' }) {
		k, v, ok := strings.Cut(strings.TrimSpace(part), "=")
		switch {
		case !ok:
		case k == "fingerprint":
			md[MdFingerprint] = v
		case k == "area_unit":
			md[mdAreaUnit] = v
		case k == "strata":
			strata, err := parseStrataField(s.path, v)
			if err != nil {
				return err
			}
			s.strata = strata
		}
	}
	if md[mdAreaUnit] == "px" {
		for i := range s.strata {
			s.strata[i].AreaM2 = nil // the area is the pixel count
		}
	}
	return nil
}

// parseStrataField reads the first line's strata=NAME:PIXELS:AREA:POINTS|...
func parseStrataField(path, v string) ([]SurveyStratum, error) {
	var out []SurveyStratum
	for _, item := range strings.Split(v, "|") {
		f := strings.Split(item, ":")
		if len(f) != 4 {
			return nil, fmt.Errorf("survey %s: the strata on its first line (%q) are not NAME:PIXELS:AREA:POINTS as survey draw writes them", path, item)
		}
		px, err1 := strconv.Atoi(f[1])
		area, err2 := strconv.ParseFloat(f[2], 64)
		n, err3 := strconv.Atoi(f[3])
		if err1 != nil || err2 != nil || err3 != nil {
			return nil, fmt.Errorf("survey %s: the strata on its first line (%q) hold a value that is not a number", path, item)
		}
		out = append(out, SurveyStratum{Name: strings.TrimSpace(f[0]), Pixels: px, Points: n, AreaM2: &area})
	}
	return out, nil
}

// csvHeader reads the header of the CSV text after the first line, finds
// the delimiter it uses and the column of each field.
func csvHeader(path, rest string) (*csv.Reader, map[string]int, error) {
	head, _, _ := strings.Cut(rest, "\n")
	comma, best := ',', -1
	for _, c := range []rune{',', ';', '\t'} {
		if n := strings.Count(head, string(c)); n > best {
			comma, best = c, n
		}
	}
	if best == 0 {
		return nil, nil, fmt.Errorf("survey %s line 2 %q is not the header: want the columns %s separated by commas or semicolons", path, strings.TrimSpace(head), strings.Join(csvFields, ","))
	}
	r := csv.NewReader(strings.NewReader(rest))
	r.Comma, r.FieldsPerRecord = comma, -1
	header, err := r.Read()
	if err != nil {
		return nil, nil, csvError(path, err)
	}
	col := map[string]int{}
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(h))
		if _, dup := col[h]; dup && h != "" {
			return nil, nil, fmt.Errorf("survey %s line 2: the column %q appears twice", path, h)
		}
		col[h] = i
	}
	for _, name := range csvFields {
		if _, ok := col[name]; ok {
			continue
		}
		if name == "reference" {
			return nil, nil, fmt.Errorf("survey %s %w (a column named reference)", path, raster.ErrNoReference)
		}
		return nil, nil, fmt.Errorf("survey %s line 2: no %s column (the header holds %q; want %s)", path, name, strings.Join(header, string(comma)), strings.Join(csvFields, string(comma)))
	}
	return r, col, nil
}

// csvError says in a line what encoding/csv found wrong, counting lines
// from the file's first (the reader starts at its second).
func csvError(path string, err error) error {
	var pe *csv.ParseError
	if !errors.As(err, &pe) {
		return fmt.Errorf("survey %s: %w", path, err)
	}
	switch {
	case errors.Is(pe.Err, csv.ErrBareQuote):
		return fmt.Errorf("survey %s line %d column %d: a quote inside a cell that does not start with one (double it, or quote the whole cell)", path, pe.Line+1, pe.Column)
	case errors.Is(pe.Err, csv.ErrQuote) && pe.StartLine != pe.Line:
		return fmt.Errorf("survey %s line %d: a cell opens a quote that no later quote closes", path, pe.StartLine+1)
	case errors.Is(pe.Err, csv.ErrQuote):
		return fmt.Errorf("survey %s line %d column %d: a quoted cell is followed by other text before the next separator", path, pe.Line+1, pe.Column)
	}
	return fmt.Errorf("survey %s line %d cannot be read as CSV", path, pe.Line+1)
}

// addRow adds the point of one CSV record at line; decimalComma says the
// numbers write decimals with a comma.
func (s *surveyFile) addRow(rec []string, col map[string]int, line int, decimalComma bool) error {
	get := func(name string) string {
		if i := col[name]; i < len(rec) {
			return strings.TrimSpace(rec[i])
		}
		return ""
	}
	if strings.TrimSpace(strings.Join(rec, "")) == "" {
		return nil // an empty row a spreadsheet left
	}
	where := fmt.Sprintf("line %d", line)
	idv, _, err := parseNumber(get("id"), decimalComma)
	if err != nil || idv != math.Trunc(idv) || math.Abs(idv) > 1<<31 {
		return fmt.Errorf("survey %s %s: id %q is not a whole number", s.path, where, get("id"))
	}
	id := int(idv)
	p := raster.Point{ID: id, Stratum: get("stratum"), MapClass: get("map_class"), Reference: get("reference")}
	var tol float64
	for _, f := range []struct {
		name string
		dst  *float64
		tol  *float64
	}{{"weight", &p.Weight, &tol}, {"x", &p.X, nil}, {"y", &p.Y, nil}} {
		v, t, err := parseNumber(get(f.name), decimalComma)
		if err != nil {
			return fmt.Errorf("survey %s %s (point %d): %s %q %v", s.path, where, id, f.name, get(f.name), err)
		}
		*f.dst = v
		if f.tol != nil {
			*f.tol = t
		}
	}
	s.pts.Points = append(s.pts.Points, p)
	s.where, s.tol = append(s.where, where), append(s.tol, tol)
	return nil
}

// decimalNumber is a number as people and spreadsheets write it, a point
// for the decimals: no hexadecimal, no digit separators, no NaN or Inf.
var decimalNumber = regexp.MustCompile(`^[+-]?(\d+(\.\d*)?|\.\d+)([eE]([+-]?\d+))?$`)

// parseNumber reads a number as decimalNumber writes it, or with a
// decimal comma when decimalComma is set, and returns with it half a unit
// of its last written digit: how exactly it was written (74786.85 is good
// to 0.005, 7.5E+04 to 500).
func parseNumber(s string, decimalComma bool) (v, tol float64, err error) {
	if decimalComma {
		if strings.Contains(s, ".") && strings.Contains(s, ",") {
			return 0, 0, errors.New("is not a number (write it without thousands separators, with a decimal comma)")
		}
		s = strings.Replace(s, ",", ".", 1)
	}
	m := decimalNumber.FindStringSubmatch(s)
	if m == nil {
		if strings.Contains(s, ",") {
			return 0, 0, errors.New("is not a number (in a comma-separated file write it without thousands separators, with a decimal point)")
		}
		return 0, 0, errors.New("is not a number")
	}
	v, err = strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) {
		return 0, 0, errors.New("is not a finite number")
	}
	decimals := 0
	if _, frac, ok := strings.Cut(m[1], "."); ok {
		decimals = len(frac)
	}
	exp, _ := strconv.Atoi(m[4])
	return v, 0.5 * math.Pow(10, float64(exp-decimals)), nil
}
