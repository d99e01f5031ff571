package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestMain lets a test run this package's main in a child process (the test
// binary itself, with BANDFOLD_TEST_MAIN set), so that signals can be sent to
// a real bandfold process.
func TestMain(m *testing.M) {
	if os.Getenv("BANDFOLD_TEST_MAIN") == "1" {
		args := strings.Split(os.Getenv("BANDFOLD_TEST_ARGS"), "\x1f")
		os.Exit(run(args, os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// TestInterruptLeavesNothing sends SIGINT to a running fold: bandfold stops
// within a second, exits 1 with a one-line message, and leaves neither the
// output nor a temporary file.
func TestInterruptLeavesNothing(t *testing.T) {
	dir := t.TempDir()
	cube := filepath.Join(dir, "cube.tif")
	mustRun(t, "demo", "synth", "--bands", "16", "--width", "1024", "--height", "1024", "--out", cube, "--quiet")
	basis := filepath.Join(dir, "b.json")
	mustRun(t, "learn", cube, "--out", basis, "--quiet", "--stride", "4")
	out := filepath.Join(dir, "out", "c.tif")
	os.Mkdir(filepath.Dir(out), 0o755)

	cmd := exec.Command(os.Args[0])
	cmd.Env = append(os.Environ(), "BANDFOLD_TEST_MAIN=1", "BANDFOLD_TEST_ARGS="+strings.Join(
		[]string{"fold", cube, "--basis", basis, "--out", out, "--type", "float64", "-k", "16", "--tile", "32", "--workers", "1"}, "\x1f"))
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	time.Sleep(300 * time.Millisecond)
	sent := time.Now()
	cmd.Process.Signal(syscall.SIGINT)
	err := cmd.Wait()
	if took := time.Since(sent); took > time.Second {
		t.Errorf("stopped %v after SIGINT", took)
	}
	if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 1 {
		t.Fatalf("exit %v, stderr %q (the run may have finished before the signal)", err, stderr.String())
	}
	if !strings.Contains(stderr.String(), "interrupted") {
		t.Errorf("stderr %q", stderr.String())
	}
	if entries, _ := os.ReadDir(filepath.Dir(out)); len(entries) != 0 {
		t.Errorf("left behind: %v", entries)
	}
}
