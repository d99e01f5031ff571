// Package testenv lets tests that need real data (testdata/external, which
// "make testdata" fetches) or an outside tool (GDAL's command-line tools,
// which "make deps" installs) skip where those are missing on a
// developer's machine, and fail under CI instead: a green CI run must not
// hide a download or an install that failed.
package testenv

import (
	"fmt"
	"os"
	"os/exec"
	"testing"
)

// Missing skips t, saying what is missing and how to get it, or fails t
// when the environment variable CI is set (CI systems set it; make test
// fetches the data and installs the tools first).
func Missing(t testing.TB, format string, args ...any) {
	t.Helper()
	msg := fmt.Sprintf(format, args...)
	if os.Getenv("CI") != "" {
		t.Fatalf("%s, although CI is set: make testdata and make deps should have provided it", msg)
	}
	t.Skip(msg)
}

// NeedFile calls Missing unless path exists; how says how to get it.
func NeedFile(t testing.TB, path, how string) {
	t.Helper()
	if _, err := os.Stat(path); err != nil {
		Missing(t, "%s missing: %s", path, how)
	}
}

// NeedTool calls Missing unless the program name is on PATH; pkg names
// the Debian package that installs it.
func NeedTool(t testing.TB, name, pkg string) {
	t.Helper()
	if _, err := exec.LookPath(name); err != nil {
		Missing(t, "%s not installed (Debian's %s; make deps installs it)", name, pkg)
	}
}
