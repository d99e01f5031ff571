package main

import (
	"bytes"
	"crypto/sha256"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"

	"bandfold/raster"
)

// TestMain lets a test run this package's main in a child process (the test
// binary itself, with BANDFOLD_TEST_MAIN set), so that signals reach a real
// bandfold process. BANDFOLD_TEST_SIGNAL=LABEL:DONE:SIGNAL makes the child
// send itself SIGNAL once DONE tiles of the pass LABEL are delivered: the
// point of interruption is chosen deterministically, not by sleeping.
func TestMain(m *testing.M) {
	if os.Getenv("BANDFOLD_TEST_MAIN") == "1" {
		if spec := os.Getenv("BANDFOLD_TEST_SIGNAL"); spec != "" {
			parts := strings.Split(spec, ":")
			at, _ := strconv.Atoi(parts[1])
			sig := map[string]syscall.Signal{"INT": syscall.SIGINT, "KILL": syscall.SIGKILL}[parts[2]]
			progressHook = func(label string, done, _ int) {
				if label == parts[0] && done == at {
					syscall.Kill(os.Getpid(), sig)
					// SIGKILL ends the process here; SIGINT cancels the
					// run's context, and the run must stop before its
					// next tiles are handed out.
					<-runContext.Done()
				}
			}
		}
		args := strings.Split(os.Getenv("BANDFOLD_TEST_ARGS"), "\x1f")
		os.Exit(run(args, os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// child runs bandfold in a child process, interrupted as signal says ("" for
// none), and returns its exit code and stderr.
func child(t *testing.T, signal string, args ...string) (int, string) {
	t.Helper()
	cmd := exec.Command(os.Args[0])
	cmd.Env = append(os.Environ(), "BANDFOLD_TEST_MAIN=1", "BANDFOLD_TEST_SIGNAL="+signal,
		"BANDFOLD_TEST_ARGS="+strings.Join(args, "\x1f"))
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	err := cmd.Run()
	if ee, ok := err.(*exec.ExitError); ok {
		if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Signaled() {
			return -int(ws.Signal()), stderr.String()
		}
		return ee.ExitCode(), stderr.String()
	} else if err != nil {
		t.Fatal(err)
	}
	return 0, stderr.String()
}

// listing returns the names in dir (hidden temporaries included).
func listing(t *testing.T, dir string) []string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	return names
}

// pixelDigest hashes every band's pixels of a raster (its metadata, which
// holds no time, is compared through the completion record elsewhere).
func pixelDigest(t *testing.T, path string) string {
	t.Helper()
	if err := raster.Init(raster.Config{}); err != nil {
		t.Fatal(err)
	}
	im := readAll(t, path)
	h := sha256.New()
	fmt.Fprint(h, im.values, im.valid)
	return fmt.Sprintf("%x", h.Sum(nil))
}

// TestInterruptsLeaveNothingAndRerunsFinish stops fold, batch fold and
// change with SIGINT and with SIGKILL at chosen tiles: SIGINT exits 1 with
// one line and leaves nothing; after SIGKILL (which no program can catch)
// only a hidden temporary may remain, and the rerun removes it and writes
// the same pixels as an uninterrupted run.
func TestInterruptsLeaveNothingAndRerunsFinish(t *testing.T) {
	dir := t.TempDir()
	cube := filepath.Join(dir, "cube.tif")
	mustRun(t, "demo", "synth", "--bands", "8", "--width", "256", "--height", "256", "--out", cube, "--quiet")
	other := filepath.Join(dir, "other.tif")
	mustRun(t, "demo", "synth", "--bands", "8", "--width", "256", "--height", "256", "--seed", "2", "--out", other, "--quiet")
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", cube, "--out", basis, "--quiet")
	ref := filepath.Join(dir, "ref", "c.tif")
	mustRun(t, "fold", cube, "--basis", basis, "--out", ref, "--quiet", "--tile", "32")
	want := pixelDigest(t, ref)
	refChange := filepath.Join(dir, "ref-change")
	mustRun(t, "change", cube, other, "--out", refChange, "--quiet", "--tile", "32")
	wantChange := pixelDigest(t, filepath.Join(refChange, "change.tif"))

	cases := []struct {
		name, pass string
		args       func(out string) []string
		target     func(out string) string
		digest     string
	}{
		{"fold", "fold", func(out string) []string {
			return []string{"fold", cube, "--basis", basis, "--out", filepath.Join(out, "c.tif"), "--tile", "32", "--workers", "2"}
		}, func(out string) string { return filepath.Join(out, "c.tif") }, want},
		{"batch fold", "fold", func(out string) []string {
			return []string{"fold", cube, "--basis", basis, "--out-dir", out, "--tile", "32", "--workers", "2"}
		}, func(out string) string { return filepath.Join(out, "cube.components.tif") }, want},
		{"change statistics", "statistics", func(out string) []string {
			return []string{"change", cube, other, "--out", filepath.Join(out, "chg"), "--tile", "32", "--workers", "2"}
		}, func(out string) string { return filepath.Join(out, "chg", "change.tif") }, wantChange},
		{"change map", "map", func(out string) []string {
			return []string{"change", cube, other, "--out", filepath.Join(out, "chg"), "--tile", "32", "--workers", "2"}
		}, func(out string) string { return filepath.Join(out, "chg", "change.tif") }, wantChange},
	}
	for _, tc := range cases {
		for _, sig := range []string{"INT", "KILL"} {
			out := filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-")+"-"+sig)
			if err := os.Mkdir(out, 0o755); err != nil {
				t.Fatal(err)
			}
			code, stderr := child(t, tc.pass+":10:"+sig, tc.args(out)...)
			switch sig {
			case "INT":
				if code != 1 || !strings.Contains(stderr, "interrupted") || strings.Count(strings.TrimSpace(stderr), "\n") != 0 {
					t.Errorf("%s SIGINT: exit %d, stderr %q; want exit 1 and one line saying interrupted", tc.name, code, stderr)
				}
				if left := listing(t, out); len(left) != 0 {
					t.Errorf("%s SIGINT left %v", tc.name, left)
				}
			case "KILL":
				if code != -int(syscall.SIGKILL) {
					t.Errorf("%s SIGKILL: exit %d, stderr %q", tc.name, code, stderr)
				}
				for _, name := range listing(t, out) {
					if !strings.HasPrefix(name, ".") {
						t.Errorf("%s SIGKILL left a visible %s", tc.name, name)
					}
				}
			}
			if code, stderr := child(t, "", tc.args(out)...); code != 0 {
				t.Fatalf("%s rerun after SIG%s: exit %d: %s", tc.name, sig, code, stderr)
			}
			for _, name := range listing(t, out) {
				if strings.HasPrefix(name, ".") {
					t.Errorf("%s rerun after SIG%s left the temporary %s", tc.name, sig, name)
				}
			}
			if got := pixelDigest(t, tc.target(out)); got != tc.digest {
				t.Errorf("%s rerun after SIG%s wrote other pixels than an uninterrupted run", tc.name, sig)
			}
		}
	}
}
