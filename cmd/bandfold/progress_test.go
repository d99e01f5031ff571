package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/cli"
)

// TestNoProgressOffTerminal: progress bars are drawn only on a terminal
// without --quiet or --json; a pipe, a file, /dev/null or a buffer never gets
// one, and --json output stays one JSON object.
func TestNoProgressOffTerminal(t *testing.T) {
	devnull, err := os.OpenFile(os.DevNull, os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer devnull.Close()
	for _, g := range []*globals{
		{stderr: &bytes.Buffer{}},
		{stderr: devnull},
		{stderr: os.Stderr, json: true},
		{stderr: os.Stderr, quiet: true},
	} {
		if g.progress("x", 100) != nil && !cli.IsTerminal(g.stderr) {
			t.Errorf("progress drawn for %+v", g)
		}
		if (g.json || g.quiet) && g.progress("x", 100) != nil {
			t.Errorf("progress drawn with --json or --quiet")
		}
	}
	dir := t.TempDir()
	a := filepath.Join(dir, "a.tif")
	mustRun(t, "demo", "synth", "--bands", "4", "--width", "300", "--height", "200", "--out", a, "--quiet")
	code, out, errs := bandfold(t, "learn", a, "--out", filepath.Join(dir, "b.json"), "--json", "--tile", "16")
	if code != 0 || strings.ContainsAny(out+errs, "\r\x1b") || strings.Count(strings.TrimSpace(out), "\n") != 0 {
		t.Errorf("exit %d; stdout %q; stderr %q", code, out, errs)
	}
}
