package transform

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

var (
	// ErrUnknownVersion is wrapped by the errors of ReadBasis and
	// ReadPartial for a file whose version this package does not read.
	ErrUnknownVersion = errors.New("unknown version")
	// ErrMalformed is wrapped by the errors of ReadBasis and ReadPartial for
	// a file that is not valid JSON, names another format, or holds values
	// that are missing, out of range or of inconsistent shapes.
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

// parse decodes and validates a version 1 file of the given format.
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

// writeFile validates v and writes it to path with writeJSON; kind names the
// file in errors.
func writeFile(kind, path string, v document) error {
	if err := v.validate(); err != nil {
		return fmt.Errorf("%s %s: %w", kind, path, err)
	}
	if err := writeJSON(path, v); err != nil {
		return fmt.Errorf("%s %s: %w", kind, path, err)
	}
	return nil
}

// decodeVersioned decodes a version 1 file of the given format into v,
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
	if head.Version != 1 {
		return fmt.Errorf("%w %d of %s (this program reads version 1)", ErrUnknownVersion, head.Version, format)
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

// writeJSON writes v as indented JSON, arrays of numbers on one line each, to
// path atomically: to a temporary file in the same folder, synced, closed and
// renamed over path. The temporary file is removed on error.
func writeJSON(path string, v any) (err error) {
	data, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	data = append(flattenLeaves(data), '\n')

	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(f.Name())
		}
	}()
	if _, err = f.Write(data); err != nil {
		return err
	}
	if err = f.Chmod(0o644); err != nil {
		return err
	}
	if err = f.Sync(); err != nil {
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	if err = os.Rename(f.Name(), path); err != nil {
		return err
	}
	// Make the rename itself durable. Some file systems cannot sync a
	// folder; the file is in place by now, so that is not an error.
	if d, derr := os.Open(filepath.Dir(path)); derr == nil {
		d.Sync()
		d.Close()
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
