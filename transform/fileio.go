package transform

import (
	"bytes"
	"cmp"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"reflect"
	"strings"
	"time"
)

var (
	// ErrUnknownVersion is wrapped by the errors of ReadBasis and
	// ReadPartial for a file whose version this package does not read.
	ErrUnknownVersion = errors.New("unknown version")
	// ErrMalformed is wrapped by the errors of ReadBasis and ReadPartial for
	// a file that is not valid JSON, names another format, or holds values
	// that are missing, out of range, of inconsistent shapes or, in a basis,
	// contradict each other.
	ErrMalformed = errors.New("malformed")
)

// document is a versioned JSON file: a Basis or a Partial.
type document interface {
	// validate checks the invariants its reader promises.
	validate() error
}

// readFile reads, decodes and validates the file of the given
// format at path; kind names the file in errors.
func readFile[T any, PT interface {
	*T
	document
}](kind, format, path string) (*T, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("%s %s: %w", kind, path, err)
	}
	// Editors on some systems begin UTF-8 files with a byte-order mark.
	data = bytes.TrimPrefix(data, []byte("\ufeff"))
	v, err := parse[T, PT](format, data)
	if err != nil {
		return nil, fmt.Errorf("%s %s: %w", kind, path, err)
	}
	return v, nil
}

// parse decodes and validates a file of the given format and a version
// this package reads.
func parse[T any, PT interface {
	*T
	document
}](format string, data []byte) (*T, error) {
	v := new(T)
	if err := decodeVersioned(data, format, v); err != nil {
		return nil, err
	}
	if err := PT(v).validate(); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrMalformed, err)
	}
	return v, nil
}

// marshal validates v and encodes it as the content of its file: indented
// JSON with every array of numbers on one line, ending in a newline; kind
// names the file in errors.
func marshal(kind string, v document) ([]byte, error) {
	if err := v.validate(); err != nil {
		return nil, fmt.Errorf("invalid %s: %w", kind, err)
	}
	data, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return nil, fmt.Errorf("%s: %w", kind, err)
	}
	return append(flattenLeaves(data), '\n'), nil
}

// decodeVersioned decodes a file of the given format and a version this
// package reads into v,
// rejecting unknown members and trailing data.
func decodeVersioned(data []byte, format string, v any) error {
	var head struct {
		Format  string `json:"format"`
		Version int    `json:"version"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return jsonErr(data, err)
	}
	if head.Format != format {
		return fmt.Errorf("%w: format %q, want %q", ErrMalformed, head.Format, format)
	}
	if head.Version < oldestVersion || head.Version > LatestVersion {
		return fmt.Errorf("%w %d of %s (this program reads versions %d to %d)", ErrUnknownVersion, head.Version, format, oldestVersion, LatestVersion)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return jsonErr(data, err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return fmt.Errorf("%w: data after the JSON object", ErrMalformed)
	}
	return nil
}

// malformedError is a refused file content said in the user's words; it
// matches ErrMalformed without repeating its text.
type malformedError struct{ msg string }

func (e *malformedError) Error() string { return e.msg }
func (e *malformedError) Unwrap() error { return ErrMalformed }

// jsonErr says what encoding/json's err found wrong in data, in the user's
// words: "components must be a whole number, got 2.5" for a value of the
// wrong type, `unknown key "x"`, or where the text stops being JSON.
func jsonErr(data []byte, err error) error {
	var me *malformedError
	var te *json.UnmarshalTypeError
	var se *json.SyntaxError
	switch {
	case errors.As(err, &me):
		return me
	case errors.As(err, &te):
		return &malformedError{fmt.Sprintf("%s must be %s, got %s", cmp.Or(te.Field, "the file"), jsonWant(te.Type), jsonGot(te.Value))}
	case errors.Is(err, io.ErrUnexpectedEOF) || errors.As(err, &se) && se.Offset >= int64(len(data)):
		return fmt.Errorf("%w: the JSON ends early (the file is truncated)", ErrMalformed)
	case errors.As(err, &se):
		// The offending byte is the last one read.
		line, col := lineCol(data, se.Offset-1)
		return fmt.Errorf("%w: not JSON at line %d, column %d (%s)", ErrMalformed, line, col, se)
	}
	if key, ok := strings.CutPrefix(err.Error(), "json: unknown field "); ok {
		return &malformedError{"unknown key " + key}
	}
	if msg, ok := timeErr(err); ok {
		return &malformedError{msg}
	}
	return fmt.Errorf("%w: %w", ErrMalformed, err)
}

// timeErr says what is wrong with a date (created, inputs.mod_time) that
// time.Time refused; encoding/json does not say which member it was.
func timeErr(err error) (string, bool) {
	const want = "a date and time (created, inputs.mod_time) must be a string like \"2024-05-01T10:30:00Z\""
	var pe *time.ParseError
	switch {
	case errors.As(err, &pe):
		return fmt.Sprintf("%s, got %q", want, pe.Value), true
	case strings.HasPrefix(err.Error(), "Time.UnmarshalJSON"):
		return want + ", got another kind of value", true
	}
	return "", false
}

// jsonWant names what a value of Go type t is in a JSON file.
func jsonWant(t reflect.Type) string {
	switch t.Kind() {
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		return "a whole number"
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return "a whole number, 0 or more"
	case reflect.Float32, reflect.Float64:
		return "a number"
	case reflect.String:
		return "a string"
	case reflect.Bool:
		return "true or false"
	case reflect.Slice, reflect.Array:
		return "a list"
	}
	return "an object"
}

// jsonGot names the JSON value an UnmarshalTypeError describes ("number
// 2.5", "string", "array" ...).
func jsonGot(v string) string {
	if n, ok := strings.CutPrefix(v, "number "); ok {
		return n
	}
	switch v {
	case "array":
		return "a list"
	case "object":
		return "an object"
	case "bool":
		return "true or false"
	case "number":
		return "a number"
	}
	return "a " + v
}

// lineCol returns the 1-based line and column of byte offset off of data.
func lineCol(data []byte, off int64) (line, col int) {
	off = min(max(off, 0), int64(len(data)))
	before := data[:off]
	line = bytes.Count(before, []byte("\n")) + 1
	return line, int(off) - bytes.LastIndexByte(before, '\n')
}

// flattenLeaves rewrites JSON indented by json.MarshalIndent so that every
// array holding no array or object sits on one line, "[1, 2, 3]": a matrix
// then reads one row per line.
func flattenLeaves(in []byte) []byte {
	out := make([]byte, 0, len(in))
	for i := 0; i < len(in); {
		switch in[i] {
		case '"':
			j := stringEnd(in, i)
			out = append(out, in[i:j]...)
			i = j
		case '[':
			end, leaf := leafEnd(in, i)
			if !leaf {
				out = append(out, '[')
				i++
				continue
			}
			for k := i; k < end; {
				switch c := in[k]; {
				case c == '"':
					j := stringEnd(in, k)
					out = append(out, in[k:j]...)
					k = j
					continue
				case c == ',':
					out = append(out, ',', ' ')
				case c != ' ' && c != '\n' && c != '\t' && c != '\r':
					out = append(out, c)
				}
				k++
			}
			i = end
		default:
			out = append(out, in[i])
			i++
		}
	}
	return out
}

// stringEnd returns the index just past the JSON string starting at in[i].
func stringEnd(in []byte, i int) int {
	for j := i + 1; j < len(in); j++ {
		switch in[j] {
		case '\\':
			j++
		case '"':
			return j + 1
		}
	}
	return len(in)
}

// leafEnd returns the index just past the array starting at in[i] and
// whether it holds no array or object.
func leafEnd(in []byte, i int) (end int, leaf bool) {
	for j := i + 1; j < len(in); j++ {
		switch in[j] {
		case '"':
			j = stringEnd(in, j) - 1
		case '[', '{':
			return 0, false
		case ']':
			return j + 1, true
		}
	}
	return len(in), false
}

// bandFile is Band as a file holds it: the same members in the same order,
// with a nodata value that can be NaN. TestBandFileMirrorsBand keeps the two
// in step.
type bandFile struct {
	Name         string      `json:"name"`
	Source       string      `json:"source"`
	Index        int         `json:"index"`
	DataType     string      `json:"data_type"`
	NoData       *noDataJSON `json:"nodata"`
	Scale        float64     `json:"scale"`
	Offset       float64     `json:"offset"`
	Min          float64     `json:"min"`
	Max          float64     `json:"max"`
	Calibration  string      `json:"calibration,omitempty"`
	WavelengthNM float64     `json:"wavelength_nm,omitempty"`
	FWHMNM       float64     `json:"fwhm_nm,omitempty"`
}

// MarshalJSON encodes b as a member of a basis or partial file, a NaN nodata
// value as the string "nan".
func (b Band) MarshalJSON() ([]byte, error) {
	f := bandFile{Name: b.Name, Source: b.Source, Index: b.Index, DataType: b.DataType,
		NoData: (*noDataJSON)(b.NoData), Scale: b.Scale, Offset: b.Offset, Min: b.Min, Max: b.Max, Calibration: b.Calibration,
		WavelengthNM: b.WavelengthNM, FWHMNM: b.FWHMNM}
	return json.Marshal(f)
}

// UnmarshalJSON decodes a band written by MarshalJSON, rejecting unknown
// members as the file readers do.
func (b *Band) UnmarshalJSON(data []byte) error {
	var f bandFile
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		err = jsonErr(data, err)
		var me *malformedError
		if errors.As(err, &me) {
			return &malformedError{"bands: " + me.msg}
		}
		return fmt.Errorf("bands: %w", err)
	}
	*b = Band{Name: f.Name, Source: f.Source, Index: f.Index, DataType: f.DataType,
		NoData: (*float64)(f.NoData), Scale: f.Scale, Offset: f.Offset, Min: f.Min, Max: f.Max, Calibration: f.Calibration,
		WavelengthNM: f.WavelengthNM, FWHMNM: f.FWHMNM}
	return nil
}

// noDataJSON is a nodata value in a file: a JSON number, or the string "nan"
// (read in any case) for NaN.
type noDataJSON float64

func (v noDataJSON) MarshalJSON() ([]byte, error) {
	if math.IsNaN(float64(v)) {
		return []byte(`"nan"`), nil
	}
	return json.Marshal(float64(v))
}

func (v *noDataJSON) UnmarshalJSON(data []byte) error {
	if len(data) > 0 && data[0] == '"' {
		var s string
		if err := json.Unmarshal(data, &s); err != nil {
			return err
		}
		if !strings.EqualFold(s, "nan") {
			return fmt.Errorf("nodata %q: want a number or \"nan\"", s)
		}
		*v = noDataJSON(math.NaN())
		return nil
	}
	var x float64
	if err := json.Unmarshal(data, &x); err != nil {
		return fmt.Errorf("nodata: %w", err)
	}
	*v = noDataJSON(x)
	return nil
}
