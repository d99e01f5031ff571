package transform

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
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

// readFile reads, decodes and validates the version 1 file of the given
// format at path; kind names the file in errors.
func readFile[T any, PT interface {
	*T
	document
}](kind, format, path string) (*T, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("%s %s: %w", kind, path, err)
	}
	v, err := parse[T, PT](format, data)
	if err != nil {
		return nil, fmt.Errorf("%s %s: %w", kind, path, err)
	}
	return v, nil
}

// parse decodes and validates a version 1 or 2 file of the given format.
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

// decodeVersioned decodes a version 1 or 2 file of the given format into v,
// rejecting unknown members and trailing data.
func decodeVersioned(data []byte, format string, v any) error {
	var head struct {
		Format  string `json:"format"`
		Version int    `json:"version"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return fmt.Errorf("%w: %w", ErrMalformed, err)
	}
	if head.Format != format {
		return fmt.Errorf("%w: format %q, want %q", ErrMalformed, head.Format, format)
	}
	if head.Version != 1 && head.Version != 2 {
		return fmt.Errorf("%w %d of %s (this program reads versions 1 and 2)", ErrUnknownVersion, head.Version, format)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return fmt.Errorf("%w: %w", ErrMalformed, err)
	}
	if _, err := dec.Token(); err != io.EOF {
		return fmt.Errorf("%w: data after the JSON object", ErrMalformed)
	}
	return nil
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
	Name        string      `json:"name"`
	Source      string      `json:"source"`
	Index       int         `json:"index"`
	DataType    string      `json:"data_type"`
	NoData      *noDataJSON `json:"nodata"`
	Scale       float64     `json:"scale"`
	Offset      float64     `json:"offset"`
	Min         float64     `json:"min"`
	Max         float64     `json:"max"`
	Calibration string      `json:"calibration,omitempty"`
}

// MarshalJSON encodes b as a member of a basis or partial file, a NaN nodata
// value as the string "nan".
func (b Band) MarshalJSON() ([]byte, error) {
	f := bandFile{Name: b.Name, Source: b.Source, Index: b.Index, DataType: b.DataType,
		NoData: (*noDataJSON)(b.NoData), Scale: b.Scale, Offset: b.Offset, Min: b.Min, Max: b.Max, Calibration: b.Calibration}
	return json.Marshal(f)
}

// UnmarshalJSON decodes a band written by MarshalJSON, rejecting unknown
// members as the file readers do.
func (b *Band) UnmarshalJSON(data []byte) error {
	var f bandFile
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		return fmt.Errorf("band: %w", err)
	}
	*b = Band{Name: f.Name, Source: f.Source, Index: f.Index, DataType: f.DataType,
		NoData: (*float64)(f.NoData), Scale: f.Scale, Offset: f.Offset, Min: f.Min, Max: f.Max, Calibration: f.Calibration}
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
