package main

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobtest"
)

// TestProgressOffTerminal: bars are drawn only on a terminal; a pipe, a
// file or a buffer gets plain progress lines instead (a learn of a few
// hundred tiles prints at least two), and --json or --quiet none at all, so
// --json output stays one JSON object.
func TestProgressOffTerminal(t *testing.T) {
	saved := progressLines
	progressLines.After = 0
	t.Cleanup(func() { progressLines = saved })
	devnull, err := os.OpenFile(os.DevNull, os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer devnull.Close()
	for _, g := range []*globals{{stderr: os.Stderr, json: true}, {stderr: os.Stderr, quiet: true}} {
		if g.progress("x", 100) != nil {
			t.Errorf("progress drawn with --json or --quiet")
		}
	}
	dir := t.TempDir()
	a := filepath.Join(dir, "a.tif")
	mustRun(t, "demo", "synth", "--bands", "4", "--width", "300", "--height", "200", "--out", a, "--quiet")
	code, out, errs := bandfold(t, "learn", a, "--out", filepath.Join(dir, "b.json"), "--json", "--tile", "16")
	if code != 0 || strings.ContainsAny(out+errs, "\r\x1b") || strings.Count(strings.TrimSpace(out), "\n") != 0 || strings.Contains(errs, "%") {
		t.Errorf("with --json: exit %d; stdout %q; stderr %q", code, out, errs)
	}
	jobtest.ValidJSONIn(t, "../../docs/schemas", "result", []byte(out))
	code, _, errs = bandfold(t, "learn", a, "--out", filepath.Join(dir, "c.json"), "--tile", "16")
	lines := regexp.MustCompile(`(?m)^learn: co-moments \d+% \([0-9,]+ of 247 tiles\), \d+ s elapsed`).FindAllString(errs, -1)
	if code != 0 || len(lines) < 2 || strings.ContainsAny(errs, "\r\x1b") {
		t.Errorf("off a terminal: exit %d, %d progress lines in %q; want at least 2 plain lines", code, len(lines), errs)
	}
}

// TestProgressLines: a line at every tenth of a pass, or after Every
// without one; none for a pass shorter than After (a clock known by
// construction).
func TestProgressLines(t *testing.T) {
	now := time.Unix(0, 0)
	var buf bytes.Buffer
	report := cli.Lines(&buf, "timeline", "map", cli.LineOptions{Every: 30 * time.Second, After: 2 * time.Second, Now: func() time.Time { return now }})
	for done := 1; done <= 100; done++ {
		now = now.Add(time.Second)
		report(done, 100)
	}
	got := strings.Split(strings.TrimSpace(buf.String()), "\n")
	// Silent for the first 2 s, then a line at each tenth, 10% ... 100%.
	if len(got) != 10 || got[0] != "timeline: map 10% (10 of 100 tiles), 10 s elapsed, about 90 s left" || got[len(got)-1] != "timeline: map 100% (100 of 100 tiles), 100 s elapsed" {
		t.Errorf("lines %q", got)
	}
	buf.Reset()
	slow := cli.Lines(&buf, "learn", "co-moments", cli.LineOptions{Every: 30 * time.Second, Now: func() time.Time { return now }})
	for done := 1; done <= 3; done++ {
		now = now.Add(31 * time.Second)
		slow(done, 1000)
	}
	if n := strings.Count(buf.String(), "\n"); n != 3 {
		t.Errorf("a slow pass: %d lines in 93 s, want one per 30 s: %q", n, buf.String())
	}
}
