package jobtest

import (
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// smallDisk mounts a tmpfs of size bytes on a fresh folder and returns it,
// or skips the test where no tmpfs can be mounted (not root, or inside a
// container that forbids mounts).
func smallDisk(t *testing.T, size string) string {
	t.Helper()
	dir := t.TempDir()
	if os.Getuid() != 0 {
		t.Skip("disk-full test: mounting a tmpfs needs root")
	}
	if out, err := exec.Command("mount", "-t", "tmpfs", "-o", "size="+size, "tmpfs", dir).CombinedOutput(); err != nil {
		t.Skipf("disk-full test: cannot mount a tmpfs here: %v: %s", err, strings.TrimSpace(string(out)))
	}
	t.Cleanup(func() {
		if out, err := exec.Command("umount", dir).CombinedOutput(); err != nil {
			t.Errorf("umount %s: %v: %s", dir, err, out)
		}
	})
	return dir
}

// TestDiskFullLeavesNothing runs fold and change into a 1 MiB tmpfs: each
// fails with one clear line naming the output and the full disk, and
// leaves nothing on it. (Truth by construction: the outputs need several
// MiB.)
func TestDiskFullLeavesNothing(t *testing.T) {
	disk := smallDisk(t, "1m")
	dir := t.TempDir()
	ctx := context.Background()
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	for i, p := range []string{a, b} {
		if _, err := demo.Synth(ctx, lcEnv, demo.SynthOptions{Bands: 8, Width: 512, Height: 512, Type: "float32", Block: 256,
			Interleave: "pixel", Out: p, Seed: uint64(i + 1)}); err != nil {
			t.Fatal(err)
		}
	}
	basis := filepath.Join(dir, "b.json")
	if _, err := learn.Learn(ctx, lcEnv, learn.LearnOptions{Scenes: []string{a}, Out: basis, Components: 8}); err != nil {
		t.Fatal(err)
	}
	runs := []struct {
		name string
		run  func() error
	}{
		{"fold", func() error {
			_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{a}, Basis: basis, Out: filepath.Join(disk, "c.tif"), Type: "float64"})
			return err
		}},
		{"change", func() error {
			_, err := pairchange.Change(ctx, lcEnv, pairchange.ChangeOptions{Before: a, After: b, Differences: true, SharedOptions: series.SharedOptions{Out: filepath.Join(disk, "chg")}})
			return err
		}},
	}
	for _, r := range runs {
		err := r.run()
		if err == nil {
			t.Errorf("%s onto a full disk succeeded", r.name)
			continue
		}
		msg := err.Error()
		if !strings.Contains(msg, disk) || !strings.Contains(strings.ToLower(msg), "space") || strings.Contains(msg, "\n") {
			t.Errorf("%s: message %q should be one line naming the output and the full disk", r.name, msg)
		}
		entries, err := os.ReadDir(disk)
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range entries {
			t.Errorf("%s left %s on the full disk", r.name, e.Name())
		}
	}
}
