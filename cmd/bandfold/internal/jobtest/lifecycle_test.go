package jobtest

import (
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"

	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
)

// The tests in this file show the output lifecycle's rules on whole jobs.
// Their truth is known by construction: which files existed before, and
// what each rule allows.

var lcEnv = jobkit.Env{Workers: 2, Version: "test"}

// lcScene writes a small synthetic scene.
func lcScene(t *testing.T, path string, seed uint64) {
	t.Helper()
	if _, err := demo.Synth(context.Background(), lcEnv, demo.SynthOptions{Bands: 6, Width: 64, Height: 48, Type: "int16", Block: 16,
		Interleave: "pixel", Out: path, Seed: seed}); err != nil {
		t.Fatal(err)
	}
}

// lcSnapshot returns the SHA-256 of every file below dir, by path.
func lcSnapshot(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		data, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		out[p] = fmt.Sprintf("%x", sha256.Sum256(data))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// lcSame requires the folder to hold exactly the files of before, unchanged.
func lcSame(t *testing.T, name, dir string, before map[string]string) {
	t.Helper()
	after := lcSnapshot(t, dir)
	for p, h := range before {
		if after[p] != h {
			t.Errorf("%s: %s was changed or removed", name, p)
		}
	}
	for p := range after {
		if _, ok := before[p]; !ok {
			t.Errorf("%s: left %s", name, p)
		}
	}
}

// lcFixture is a folder with a scene, a second date, a basis, a mask and a
// component image.
type lcFixture struct {
	dir, scene, other, basis, mask, comps string
}

func newLCFixture(t *testing.T) lcFixture {
	t.Helper()
	dir := t.TempDir()
	f := lcFixture{dir: dir, scene: filepath.Join(dir, "in.tif"), other: filepath.Join(dir, "other.tif"),
		basis: filepath.Join(dir, "b.json"), mask: filepath.Join(dir, "mask.tif"), comps: filepath.Join(dir, "c.tif")}
	lcScene(t, f.scene, 1)
	lcScene(t, f.other, 2)
	lcScene(t, f.mask, 3)
	ctx := context.Background()
	if _, err := learn.Learn(ctx, lcEnv, learn.LearnOptions{Scenes: []string{f.scene}, Out: f.basis, Variance: 0.99}); err != nil {
		t.Fatal(err)
	}
	if _, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: f.comps}); err != nil {
		t.Fatal(err)
	}
	return f
}

// TestOutputSameAsAnInputIsRefused: an output that is the same file as an
// input, mask, basis or another output is refused before any work, with or
// without overwrite, and nothing in the folder changes.
func TestOutputSameAsAnInputIsRefused(t *testing.T) {
	f := newLCFixture(t)
	link := filepath.Join(f.dir, "link.tif")
	if err := os.Link(f.scene, link); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	before := lcSnapshot(t, f.dir)
	for _, overwrite := range []bool{false, true} {
		tests := []struct {
			name string
			run  func() error
		}{
			{"fold --out = input", func() error {
				_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: f.scene, Overwrite: overwrite})
				return err
			}},
			{"fold --out = hard link of input", func() error {
				_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: link, Overwrite: overwrite})
				return err
			}},
			{"fold --out = basis", func() error {
				_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: f.basis, Overwrite: overwrite})
				return err
			}},
			{"fold --out = mask", func() error {
				_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: f.mask, Overwrite: overwrite,
					Input: jobkit.Input{Masks: []raster.MaskRule{{Path: f.mask}}}})
				return err
			}},
			{"fold --preview = --out", func() error {
				out := filepath.Join(f.dir, "new.tif")
				_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: out, Preview: out, Overwrite: overwrite})
				return err
			}},
			{"learn --out = input", func() error {
				_, err := learn.Learn(ctx, lcEnv, learn.LearnOptions{Scenes: []string{f.scene}, Out: f.dir + "/./in.tif", Variance: 0.99, Overwrite: overwrite})
				return err
			}},
			{"unfold --out = components", func() error {
				_, err := fold.Unfold(ctx, lcEnv, fold.UnfoldOptions{Components: f.comps, Basis: f.basis, Out: f.comps, Overwrite: overwrite})
				return err
			}},
			{"change --out = folder of the inputs", func() error {
				_, err := pairchange.Change(ctx, lcEnv, pairchange.ChangeOptions{Before: f.scene, After: f.other, SharedOptions: series.SharedOptions{Out: f.dir, Overwrite: overwrite}})
				return err
			}},
			{"change --out = parent of the inputs", func() error {
				_, err := pairchange.Change(ctx, lcEnv, pairchange.ChangeOptions{Before: f.scene, After: f.other, SharedOptions: series.SharedOptions{Out: filepath.Join(f.dir, "sub", ".."), Overwrite: overwrite}})
				return err
			}},
		}
		for _, tc := range tests {
			name := fmt.Sprintf("%s (overwrite %v)", tc.name, overwrite)
			err := tc.run()
			if err == nil {
				t.Errorf("%s: accepted", name)
				continue
			}
			// Either rule names the clash: the same file, or a folder holding
			// files that are not a previous output.
			if !errors.Is(err, output.ErrSameFile) && !errors.Is(err, output.ErrForeignFolder) && !errors.Is(err, output.ErrExists) {
				t.Errorf("%s: error %q is not a same-file or foreign-folder refusal", name, err)
			}
			if strings.Count(err.Error(), "\n") != 0 {
				t.Errorf("%s: message of several lines: %q", name, err)
			}
			lcSame(t, name, f.dir, before)
		}
	}
}

// TestConcurrentRunsOneWins: two runs writing the same new output at once:
// exactly one succeeds, the other fails with a clear error, and no
// temporary is left.
func TestConcurrentRunsOneWins(t *testing.T) {
	f := newLCFixture(t)
	ctx := context.Background()
	for _, tc := range []struct {
		name string
		run  func(out string) error
	}{
		{"fold", func(out string) error {
			_, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: out})
			return err
		}},
		{"change", func(out string) error {
			_, err := pairchange.Change(ctx, lcEnv, pairchange.ChangeOptions{Before: f.scene, After: f.other, SharedOptions: series.SharedOptions{Out: out}})
			return err
		}},
	} {
		for round := range 3 {
			dir := filepath.Join(f.dir, fmt.Sprintf("race-%s-%d", tc.name, round))
			if err := os.Mkdir(dir, 0o755); err != nil {
				t.Fatal(err)
			}
			out := filepath.Join(dir, "out")
			var wg sync.WaitGroup
			errs := make([]error, 2)
			start := make(chan struct{})
			for i := range errs {
				wg.Add(1)
				go func() {
					defer wg.Done()
					<-start
					errs[i] = tc.run(out)
				}()
			}
			close(start)
			wg.Wait()
			ok := 0
			for _, err := range errs {
				switch {
				case err == nil:
					ok++
				case !strings.Contains(err.Error(), "exists"):
					t.Errorf("%s: the losing run failed with %q, want a message that the output exists", tc.name, err)
				}
			}
			if ok != 1 {
				t.Errorf("%s round %d: %d runs succeeded (%v), want exactly one", tc.name, round, ok, errs)
			}
			entries, err := os.ReadDir(dir)
			if err != nil {
				t.Fatal(err)
			}
			// fold's output has its STAC Item beside it; change's folder
			// holds its own.
			want := map[string][]string{"fold": {"out", "out.item.json"}, "change": {"out"}}[tc.name]
			var names []string
			for _, e := range entries {
				names = append(names, e.Name())
			}
			if !slices.Equal(names, want) {
				t.Errorf("%s round %d: folder holds %v, want only %v", tc.name, round, names, want)
			}
		}
	}
}

// TestOutputFolderReplacedOnlyWhenItIsAPreviousOutput: change replaces a
// previous change output with overwrite, refuses it without, and refuses a
// folder holding anything else even with overwrite.
func TestOutputFolderReplacedOnlyWhenItIsAPreviousOutput(t *testing.T) {
	f := newLCFixture(t)
	ctx := context.Background()
	out := filepath.Join(f.dir, "chg")
	runChange := func(overwrite bool) error {
		_, err := pairchange.Change(ctx, lcEnv, pairchange.ChangeOptions{Before: f.scene, After: f.other, SharedOptions: series.SharedOptions{Out: out, Overwrite: overwrite}})
		return err
	}
	if err := runChange(false); err != nil {
		t.Fatal(err)
	}
	first := lcSnapshot(t, out)
	if err := runChange(false); err == nil || !errors.Is(err, output.ErrExists) {
		t.Errorf("rerun without overwrite: %v, want ErrExists", err)
	}
	lcSame(t, "rerun without overwrite", out, first)
	if err := runChange(true); err != nil {
		t.Errorf("rerun with overwrite: %v", err)
	}
	if _, err := os.Stat(filepath.Join(out, output.ManifestName)); err != nil {
		t.Errorf("no manifest after the rerun: %v", err)
	}
	notes := filepath.Join(out, "notes.txt")
	if err := os.WriteFile(notes, []byte("field visit"), 0o644); err != nil {
		t.Fatal(err)
	}
	held := lcSnapshot(t, out)
	if err := runChange(true); err == nil || !errors.Is(err, output.ErrForeignFolder) {
		t.Errorf("folder with a foreign file, overwrite: %v, want ErrForeignFolder", err)
	}
	lcSame(t, "foreign folder", out, held)
}

// TestMissingParentFoldersAreCreated: every output creates its missing
// parent folders.
func TestMissingParentFoldersAreCreated(t *testing.T) {
	f := newLCFixture(t)
	ctx := context.Background()
	deep := func(name string) string { return filepath.Join(f.dir, "new", name, "x", "y") }
	if _, err := learn.Learn(ctx, lcEnv, learn.LearnOptions{Scenes: []string{f.scene}, Out: deep("learn") + "/b.json", Variance: 0.99}); err != nil {
		t.Errorf("learn: %v", err)
	}
	if _, err := fold.Fold(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: deep("fold") + "/c.tif", Preview: deep("preview") + "/p.png"}); err != nil {
		t.Errorf("fold: %v", err)
	}
	if _, err := fold.FoldBatch(ctx, lcEnv, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, OutDir: deep("batch")}); err != nil {
		t.Errorf("batch fold: %v", err)
	}
	if _, err := learn.Inspect(ctx, lcEnv, learn.InspectOptions{Basis: f.basis, Plots: deep("plots")}); err != nil {
		t.Errorf("inspect: %v", err)
	}
	if _, err := pairchange.Change(ctx, lcEnv, pairchange.ChangeOptions{Before: f.scene, After: f.other, SharedOptions: series.SharedOptions{Out: deep("change")}}); err != nil {
		t.Errorf("change: %v", err)
	}
	for _, p := range []string{deep("learn") + "/b.json", deep("fold") + "/c.tif", deep("preview") + "/p.png",
		deep("batch") + "/in.components.tif", deep("plots") + "/scree.png", deep("change") + "/change.tif"} {
		if _, err := os.Stat(p); err != nil {
			t.Errorf("%s not written: %v", p, err)
		}
	}
}

// TestFailedCommandsLeaveNoOutput: unfold --compare against an image with
// no valid pixel, and fold whose preview cannot be written, fail and leave
// none of their outputs.
func TestFailedCommandsLeaveNoOutput(t *testing.T) {
	f := newLCFixture(t)
	ctx := context.Background()
	// A mask that is zero everywhere leaves no pixel to compare.
	zero := filepath.Join(f.dir, "zero.tif")
	s, err := raster.Open([]string{f.scene})
	if err != nil {
		t.Fatal(err)
	}
	err = jobkit.WriteRaster(ctx, lcEnv, zero, raster.Spec{Grid: s.Grid, Bands: 1, DataType: "Byte"}, tiles.NewGrid(s.Width, s.Height, 32, 32),
		func(int) jobkit.RenderFunc {
			return func(t tiles.Tile, dst []float64) error { clear(dst); return nil }
		})
	if err != nil {
		t.Fatal(err)
	}
	before := lcSnapshot(t, f.dir)
	restored := filepath.Join(f.dir, "restored.tif")
	_, err = fold.Unfold(ctx, lcEnv, fold.UnfoldOptions{Components: f.comps, Basis: f.basis, Out: restored, Compare: f.scene,
		Input: jobkit.Input{Masks: []raster.MaskRule{{Path: zero}}}})
	if err == nil || !strings.Contains(err.Error(), "no pixel is valid in both") {
		t.Errorf("unfold --compare with no valid pixel: %v", err)
	}
	lcSame(t, "unfold --compare with no valid pixel", f.dir, before)

	// The preview's target appears as a folder while fold works: the
	// preview cannot be written, and the component image must go too.
	out := filepath.Join(f.dir, "comp2.tif")
	png := filepath.Join(f.dir, "p.png")
	env := lcEnv
	env.Progress = func(label string, _ int64) func(done, total int) {
		return func(done, _ int) {
			if label == "fold" && done == 1 {
				os.Mkdir(png, 0o755)
			}
		}
	}
	_, err = fold.Fold(ctx, env, fold.FoldOptions{Scenes: []string{f.scene}, Basis: f.basis, Out: out, Preview: png, Input: jobkit.Input{Tile: 16}})
	if err == nil {
		t.Fatal("fold with an unwritable preview succeeded")
	}
	if err := os.Remove(png); err != nil {
		t.Fatal(err)
	}
	lcSame(t, "fold with an unwritable preview", f.dir, before)
}
