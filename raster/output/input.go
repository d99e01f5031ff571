package output

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"syscall"
)

// ErrInput marks a file the user named as an input (an image, mask, basis,
// partial, wavelength list, scene list, survey, reference) that does not
// exist or cannot be read. The rule is one for every such file: the
// command line names something that is not there, so it is a usage error
// (exit 2), as opposed to a file that is there but holds the wrong data
// (exit 1). A folder given for a file is the latter: it exists.
var ErrInput = errors.New("missing or unreadable input")

// inputError is a refused input: its message names the file and says what
// is wrong; it matches ErrInput and, when given, a caller's own sentinel.
type inputError struct {
	msg  string
	also error
}

func (e *inputError) Error() string { return e.msg }
func (e *inputError) Unwrap() []error {
	if e.also == nil {
		return []error{ErrInput}
	}
	return []error{ErrInput, e.also}
}

// CheckInput checks that the input file or folder at path exists and can
// be opened for reading. Its error names path, says "no such file" or
// "cannot be read (REASON)", and matches ErrInput and, for a missing file,
// notFound when it is not nil (raster.ErrNotFound).
func CheckInput(path string, notFound error) error {
	f, err := os.Open(path)
	if err == nil {
		return f.Close()
	}
	return inputErr(path, err, notFound)
}

// inputErr turns the failure to open or read input path into its
// inputError.
func inputErr(path string, err, notFound error) error {
	if errors.Is(err, fs.ErrNotExist) || errors.Is(err, syscall.ENOTDIR) {
		return &inputError{path + ": no such file", notFound}
	}
	return &inputError{fmt.Sprintf("%s: cannot be read (%v)", path, bare(err)), nil}
}

// ReadInput reads the input file the user named at path, without a
// leading UTF-8 byte-order mark (spreadsheets and some editors write one).
// A missing or unreadable file gives CheckInput's error; a folder is
// refused with an error that does not match ErrInput.
func ReadInput(path string) ([]byte, error) {
	data, err := os.ReadFile(path)
	switch {
	case errors.Is(err, syscall.EISDIR):
		return nil, fmt.Errorf("%s: is a folder, not a file", path)
	case err != nil:
		return nil, inputErr(path, err, nil)
	}
	return StripBOM(data), nil
}

// bom is the UTF-8 encoding of U+FEFF, the byte-order mark.
var bom = []byte{0xEF, 0xBB, 0xBF}

// StripBOM returns data without a leading UTF-8 byte-order mark.
func StripBOM(data []byte) []byte { return bytes.TrimPrefix(data, bom) }
