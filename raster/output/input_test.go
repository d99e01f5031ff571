package output

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCheckInput (issue 24, item 9): a missing or unreadable input file
// gives one error matching ErrInput (a usage error) that names it; a file
// or folder that is there passes; ReadInput strips a UTF-8 byte-order mark
// (issue 24, item 10) and refuses a folder with an error that is not
// ErrInput. Known by construction: the test makes each path.
func TestCheckInput(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "w.txt")
	writeFile(t, file, "\ufeff450 nm\n")
	notFound := errors.New("the caller's own sentinel")
	for _, c := range []struct {
		path string
		want string // "" passes
	}{
		{file, ""},
		{dir, ""},
		{filepath.Join(dir, "none.txt"), "none.txt: no such file"},
		{filepath.Join(file, "x.txt"), "x.txt: no such file"}, // under a plain file
	} {
		err := CheckInput(c.path, notFound)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.path, err)
		case c.want != "" && (!errors.Is(err, ErrInput) || !errors.Is(err, notFound) || !strings.HasSuffix(err.Error(), c.want)):
			t.Errorf("%s: got %v, want ErrInput and the caller's sentinel, ending %q", c.path, err, c.want)
		}
	}
	data, err := ReadInput(file)
	if err != nil || string(data) != "450 nm\n" {
		t.Errorf("ReadInput = %q, %v; want the text without its byte-order mark", data, err)
	}
	if _, err := ReadInput(dir); err == nil || errors.Is(err, ErrInput) || !strings.Contains(err.Error(), "is a folder") {
		t.Errorf("ReadInput(folder) = %v, want a folder error that is not ErrInput", err)
	}
	if os.Geteuid() == 0 {
		return // root reads every file: no unreadable one to make
	}
	locked := filepath.Join(dir, "locked.txt")
	writeFile(t, locked, "x")
	os.Chmod(locked, 0)
	if err := CheckInput(locked, notFound); !errors.Is(err, ErrInput) || errors.Is(err, notFound) || !strings.Contains(err.Error(), "locked.txt: cannot be read (permission denied)") {
		t.Errorf("unreadable file: got %v", err)
	}
}
