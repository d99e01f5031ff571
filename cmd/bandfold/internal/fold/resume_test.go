package fold_test

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
)

// damage edits a complete output in place.
type damage struct {
	name string
	edit func(t *testing.T, path string)
	// want is in the reason the rerun gives.
	want string
}

// truncate cuts the file at path to half its size, as an interrupted copy
// does; its header and completion record stay readable (GDAL writes the
// directory first).
func truncate(t *testing.T, path string) {
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(path, fi.Size()/2); err != nil {
		t.Fatal(err)
	}
}

// flipMiddleByte changes the middle byte of the file at path: with
// COMPRESS=NONE and an image of one whole 256 x 256 block, a byte of a
// stored value.
func flipMiddleByte(t *testing.T, path string) {
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	data[len(data)/2] ^= 0x55
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestBatchResumeRedoesDamagedOutputs (issue 24, item 7): a batch rerun
// tells a complete output from a damaged one by the checksum of the values
// written that its completion record holds, read back from the file. For
// every kind of output (float32, int16, a budget's integer codes, a COG, an
// uncompressed file, and a lossy one, whose record can only ask for a whole
// read), a rerun of an intact batch skips every scene; after
// one output is cut to half its size (before, counted as "skipped"), or,
// uncompressed, has a byte changed, the rerun writes that one again, saying
// why, and skips the other, and the output rewritten holds the values of
// the first write again (known by construction: same inputs and options).
// The scenes are invented (Synth), one 256 x 256 block each.
func TestBatchResumeRedoesDamagedOutputs(t *testing.T) {
	dir := t.TempDir()
	scenes, basis := synthScenes(t, dir, 2, 256, 256)
	cut := damage{"cut short", truncate, "its values from column 0, row 0 on cannot be read (the file is cut short or corrupt)"}
	tests := []struct {
		name   string
		o      fold.FoldOptions
		damage damage
	}{
		{"float32", fold.FoldOptions{}, cut},
		{"int16", fold.FoldOptions{Type: "int16"}, cut},
		{"budget", fold.FoldOptions{Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: 20}}, cut},
		{"cog", fold.FoldOptions{Format: raster.COG}, cut},
		{"lossy lerc, checked by a whole read", fold.FoldOptions{CreationOptions: []string{"COMPRESS=LERC", "MAX_Z_ERROR=0.5"}}, cut},
		{"uncompressed, a byte changed", fold.FoldOptions{Type: "int16", CreationOptions: []string{"COMPRESS=NONE"}},
			damage{"a byte changed", flipMiddleByte, "its values are not those written"}},
	}
	for _, tc := range tests {
		o := tc.o
		o.Scenes, o.Basis, o.OutDir = scenes, basis, filepath.Join(dir, strings.ReplaceAll(tc.name, " ", "-"))
		batch(t, tc.name+": first run", o, 2, 0)
		batch(t, tc.name+": intact rerun", o, 0, 2)
		out := filepath.Join(o.OutDir, "scene0.components.tif")
		first := filepath.Join(dir, "first.tif")
		jobtest.CopyFile(t, out, first)
		tc.damage.edit(t, out)
		res := batch(t, tc.name+": rerun after damage", o, 1, 1)
		if r := res.Results[0]; r.Status != "written" || !strings.Contains(r.Damaged, tc.damage.want) {
			t.Errorf("%s: %s output rewritten as %q (%s), want written because %q", tc.name, tc.damage.name, r.Status, r.Damaged, tc.damage.want)
		}
		sameValues(t, tc.name+": rewritten output", out, first)
		jobtest.NoTemporaries(t, o.OutDir)
	}
}

// batch runs FoldBatch, which must succeed writing and skipping the given
// numbers of scenes.
func batch(t *testing.T, name string, o fold.FoldOptions, written, skipped int) *fold.BatchResult {
	t.Helper()
	res, err := fold.FoldBatch(t.Context(), jobtest.TestEnv, o)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if res.Written != written || res.Skipped != skipped || res.Failed != 0 {
		t.Fatalf("%s: %d written, %d skipped, %d failed; want %d written, %d skipped", name, res.Written, res.Skipped, res.Failed, written, skipped)
	}
	return res
}

// synthScenes writes n invented 5-band scenes of width x height pixels,
// scene0.tif ... (Synth, seeds 1 ... n), into dir, and the basis of the
// first, b.json.
func synthScenes(t *testing.T, dir string, n, width, height int) (scenes []string, basis string) {
	t.Helper()
	for i := range n {
		p := filepath.Join(dir, fmt.Sprintf("scene%d.tif", i))
		jobtest.Synth(t, p, 5, width, height, uint64(i+1))
		scenes = append(scenes, p)
	}
	basis = filepath.Join(dir, "b.json")
	jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: scenes[:1], Out: basis})
	return scenes, basis
}
