package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"bandfold/tiles/testenv"
)

// landsat is the real test scene: a Landsat 7 ETM+ 6-band subset (349 x 352,
// UTM, public-domain USGS imagery) shipped in Debian's r-cran-stars package as
// tif/L7_ETMs.tif and fetched by "make testdata".
const landsat = "../../testdata/external/L7_ETMs.tif"

// NeedLandsat skips the test where the scene is missing, and fails it
// under CI (issue 24, item 13).
func needLandsat(t *testing.T) {
	t.Helper()
	testenv.NeedFile(t, landsat, "run make testdata")
}

// bandfold runs the command line in-process and returns the exit code,
// stdout and stderr.
func bandfold(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

// mustRun runs a command that must succeed.
func mustRun(t *testing.T, args ...string) string {
	t.Helper()
	code, out, errs := bandfold(t, args...)
	if code != 0 {
		t.Fatalf("bandfold %s: exit %d: %s", strings.Join(args, " "), code, errs)
	}
	return out
}

func TestEveryCommandHasHelpAndExample(t *testing.T) {
	root := newRootCommand(&globals{})
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		for _, sub := range c.Commands() {
			if sub.Hidden || sub.Name() == "help" || sub.Name() == "completion" {
				continue
			}
			if strings.TrimSpace(sub.Example) == "" {
				t.Errorf("%s has no example", sub.CommandPath())
			}
			path := strings.Fields(sub.CommandPath())[1:]
			code, out, errs := bandfold(t, append(path, "--help")...)
			if code != 0 || !strings.Contains(out, "Usage:") {
				t.Errorf("%s --help: exit %d, %s", sub.CommandPath(), code, errs)
			}
			walk(sub)
		}
	}
	walk(root)
}

func TestUsageAndRuntimeErrors(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	text := filepath.Join(dir, "notes.txt")
	os.WriteFile(text, []byte("not a raster"), 0o644)
	out := filepath.Join(dir, "b.json")
	tests := []badInput{
		{"no image", []string{"learn", "--out", out}, 2, "requires at least 1 arg"},
		{"no output", []string{"learn", landsat}, 2, "[out partial suggest-exclude]"},
		{"unknown flag", []string{"learn", landsat, "--out", out, "--frobnicate"}, 2, "unknown flag"},
		{"bad variance", []string{"learn", landsat, "--out", out, "--variance", "1.5"}, 2, "--variance 1.5: must be in (0, 1]"},
		{"zero variance", []string{"learn", landsat, "--out", out, "--variance", "0"}, 2, "--variance 0"},
		{"too many components", []string{"learn", landsat, "--out", out, "--components", "7"}, 2, "--components 7: the images have only 6 bands"},
		{"bad mode", []string{"learn", landsat, "--out", out, "--mode", "spectral"}, 2, "spectral"},
		{"bad bands", []string{"learn", landsat, "--out", out, "--bands", "3-1"}, 2, "runs backwards"},
		{"band out of range", []string{"learn", landsat, "--out", out, "--bands", "1-9"}, 2, "band 7 selected but the stack has 6 bands"},
		{"one band", []string{"learn", landsat, "--out", out, "--bands", "2"}, 2, "has 6 bands but --bands selects only 1"},
		{"missing file", []string{"learn", filepath.Join(dir, "none.tif"), "--out", out}, 2, "none.tif: no such file"}, // issue 24, item 9
		{"not a raster", []string{"learn", text, "--out", out}, 1, "notes.txt: not a raster"},
		{"no valid pixels", []string{"learn", landsat, "--out", out, "--nodata", "-1e30", "--mask", landsat, "--bands", "1,2", "--stride", "1000"}, 1, "only 1 valid pixels"},
		{"output under a file", []string{"learn", landsat, "--out", filepath.Join(text, "b.json")}, 1, "is not a folder"},
		{"bad shard", []string{"learn", landsat, "--partial", out, "--shard", "4/4"}, 2, "need 0 <= I < N"},
		{"shard without partial", []string{"learn", landsat, "--out", out, "--shard", "1/4"}, 2, "--shard needs --partial"},
		{"bad workers", []string{"learn", landsat, "--out", out, "--workers", "0"}, 2, "--workers 0"},
		{"bad basis", []string{"inspect", text}, 1, "notes.txt"},
	}
	checkBadInputs(t, tests, out)
}

// badInput is a command line that must fail: with exit code code and one
// line on stderr containing want.
type badInput struct {
	name string
	args []string
	code int
	want string
}

// checkBadInputs runs each bad command line and checks its exit code, its
// one-line message and, when out is set, that nothing was written there.
func checkBadInputs(t *testing.T, tests []badInput, out string) {
	t.Helper()
	for _, tc := range tests {
		code, _, errs := bandfold(t, tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and one line containing %q", tc.name, code, errs, tc.code, tc.want)
		}
		if out == "" {
			continue
		}
		if _, err := os.Stat(out); err == nil {
			t.Fatalf("%s: wrote %s", tc.name, out)
		}
	}
}

func TestMoreBadInputs(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	five := filepath.Join(dir, "five.tif")
	mustRun(t, "demo", "synth", "--bands", "5", "--width", "40", "--height", "30", "--out", five, "--quiet")
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", landsat, "--out", basis, "--quiet")
	file := filepath.Join(dir, "plain")
	os.WriteFile(file, []byte("x"), 0o644)
	tests := []badInput{
		{"pooled band counts", []string{"learn", landsat, five, "--out", filepath.Join(dir, "p.json")}, 1, "pooled scenes need the same bands"},
		{"plots folder", []string{"inspect", basis, "--plots", filepath.Join(file, "plots")}, 1, "plain is not a folder"},
		{"few pixels", []string{"learn", five, "--stride", "20", "--out", filepath.Join(dir, "f.json")}, 1, "need at least bands + 1"},
		{"shard auto without scheduler", []string{"learn", landsat, "--partial", filepath.Join(dir, "x.json"), "--shard", "auto"}, 2, "no job array"},
		{"batch into a file", []string{"fold", landsat, "--basis", basis, "--out-dir", file}, 1, "plain is a file"},
	}
	t.Setenv("SLURM_ARRAY_TASK_ID", "")
	t.Setenv("JOB_COMPLETION_INDEX", "")
	checkBadInputs(t, tests, "")
}

// TestCPUProfileSwitch: BANDFOLD_CPUPROFILE's file holds a profile in
// pprof's format (gzip-compressed, RFC 1952's magic bytes 1f 8b) once the
// run ends; a path that cannot be written is said on stderr, naming the
// variable, and the run goes on.
func TestCPUProfileSwitch(t *testing.T) {
	path := filepath.Join(t.TempDir(), "cpu.prof")
	var msg bytes.Buffer
	stop := startProfile(path, &msg)
	sum := 0
	for i := range 10_000_000 {
		sum += i % 7
	}
	stop()
	b, err := os.ReadFile(path)
	if err != nil || len(b) < 2 || b[0] != 0x1f || b[1] != 0x8b || msg.Len() != 0 {
		t.Fatalf("profile %d bytes (%v), message %q (sum %d)", len(b), err, msg.String(), sum)
	}
	bad := filepath.Join(t.TempDir(), "missing", "cpu.prof")
	startProfile(bad, &msg)()
	if !strings.Contains(msg.String(), profileEnv+"="+bad) || strings.Count(msg.String(), "\n") != 1 {
		t.Errorf("message %q, want one line naming %s=%s", msg.String(), profileEnv, bad)
	}
	startProfile("", &msg)() // no profile asked for: nothing to do
}
