package fold

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
)

// BatchResult sums up a batch fold.
type BatchResult struct {
	Scenes          int     `json:"scenes"`
	Written         int     `json:"written"`
	Skipped         int     `json:"skipped"`
	Failed          int     `json:"failed"`
	Shard           string  `json:"shard"`
	Seconds         float64 `json:"seconds"`
	ScenesPerMinute float64 `json:"scenes_per_minute"`
	// Results holds every scene's result in list order.
	Results []FoldScene `json:"-"`
}

// FoldBatch folds many scenes into OutDir, named by Name. Complete outputs
// with the same completion record are skipped, so a rerun after a crash
// finishes only what is missing; a failing scene is reported and the rest
// go on (the error is then ErrBatchFailed).
func FoldBatch(ctx context.Context, env jobkit.Env, o FoldOptions) (_ *BatchResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	if o.OutDir == "" {
		return nil, jobkit.Usagef("a batch needs --out-dir")
	}
	if o.Preview != "" {
		return nil, jobkit.Usagef("--preview goes with --out (one input)")
	}
	if o.Name == "" {
		o.Name = "{stem}.components.tif"
	}
	if !strings.Contains(o.Name, "{stem}") {
		return nil, jobkit.Usagef("--name %q must contain {stem} so that scenes do not overwrite each other", o.Name)
	}
	f, err := prepareFold(env, &o)
	if err != nil {
		return nil, err
	}
	inputs, err := CollectInputs(o.Scenes, o.List)
	if err != nil {
		return nil, err
	}
	if len(inputs) == 0 {
		return nil, jobkit.Usagef("no input image (give IMAGE arguments or --list)")
	}
	sh := o.Shard.OrWhole()
	if fi, err := os.Stat(o.OutDir); err == nil && !fi.IsDir() {
		return nil, fmt.Errorf("output folder %s is a file", o.OutDir)
	}
	// Every output name is checked before any work: inside the folder,
	// distinct from each other and from every input.
	outs := map[string]string{}
	var mine []string
	for i, in := range inputs {
		if i%sh.N != sh.I {
			continue
		}
		out, err := outputName(o.OutDir, o.Name, in)
		if err != nil {
			return nil, err
		}
		if prev, dup := outs[out]; dup {
			return nil, jobkit.Usagef("%s and %s would both be written to %s; change --name", prev, in, out)
		}
		outs[out] = in
		mine = append(mine, in)
	}
	var ins, targets []output.Path
	for _, in := range inputs {
		for _, p := range jobkit.SplitStack(in) {
			ins = append(ins, output.Path{Role: "input", Path: raster.ItemFile(p)})
		}
	}
	ins = append(ins, output.Path{Role: "basis", Path: o.Basis})
	if o.List != "" {
		ins = append(ins, output.Path{Role: "list", Path: o.List})
	}
	for out := range outs {
		targets = append(targets, jobkit.RasterOutputs(out)...)
	}
	if err := output.Distinct(ins, targets); err != nil {
		return nil, err
	}
	if err := os.MkdirAll(o.OutDir, 0o755); err != nil {
		return nil, fmt.Errorf("output folder %s cannot be created: %w", o.OutDir, jobkit.UnwrapPath(err))
	}
	start := time.Now()
	sum := &BatchResult{Shard: sh.String()}
	for _, in := range mine {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		sum.Scenes++
		out, _ := outputName(o.OutDir, o.Name, in)
		res, err := f.scene(ctx, in, out, true)
		switch {
		case jobkit.Canceled(err):
			return nil, err
		case err != nil:
			res.Status, res.Error = "failed", strings.ReplaceAll(err.Error(), "\n", "; ")
			sum.Failed++
		case res.Status == "skipped":
			sum.Skipped++
		default:
			sum.Written++
		}
		sum.Results = append(sum.Results, res)
		if o.OnScene != nil {
			o.OnScene(res)
		}
	}
	sum.Seconds = time.Since(start).Seconds()
	if sum.Seconds > 0 {
		sum.ScenesPerMinute = float64(sum.Written) / sum.Seconds * 60
	}
	if sum.Failed > 0 {
		return sum, jobkit.ErrBatchFailed
	}
	return sum, nil
}

// CollectInputs gathers input images from arguments (globs expanded when
// they match files) and a list file, whose relative paths are relative to
// the list file's folder.
func CollectInputs(args []string, list string) ([]string, error) {
	var out []string
	for _, a := range args {
		if strings.ContainsAny(a, "*?[") && !raster.IsVirtual(a) {
			if _, err := os.Stat(a); err != nil {
				matches, err := filepath.Glob(a)
				if err != nil {
					return nil, jobkit.Usagef("bad pattern %q: %v", a, err)
				}
				if len(matches) == 0 {
					return nil, fmt.Errorf("%s: no file matches", a)
				}
				out = append(out, matches...)
				continue
			}
		}
		out = append(out, a)
	}
	if list == "" {
		return jobkit.ExpandImages(out)
	}
	listed, err := readList(list)
	if err != nil {
		return nil, err
	}
	return append(out, listed...), nil
}

// maxListLine is the longest line readList accepts: 16 paths of the
// longest Linux allows (PATH_MAX, 4096 bytes) joined with commas.
const maxListLine = 64 << 10

// readList reads a --list file: one IMAGE per line (files of a stack
// joined with commas), relative paths relative to the list's folder; blank
// lines and lines starting with # are skipped, and a byte-order mark at the
// start (as some editors write) is dropped.
func readList(list string) ([]string, error) {
	f, err := os.Open(list)
	if err != nil {
		return nil, fmt.Errorf("list %s: %w", list, jobkit.UnwrapPath(err))
	}
	defer f.Close()
	base := filepath.Dir(list)
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 0, 4<<10), maxListLine)
	var out []string
	n := 0
	for sc.Scan() {
		n++
		line := sc.Text()
		if n == 1 {
			line = strings.TrimPrefix(line, "\ufeff")
		}
		if line = strings.TrimSpace(line); line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		var parts []string
		for _, p := range jobkit.SplitStack(line) {
			if !filepath.IsAbs(p) && !raster.IsVirtual(p) && !raster.IsURL(p) {
				p = filepath.Join(base, p)
			}
			parts = append(parts, p)
		}
		out = append(out, strings.Join(parts, ","))
	}
	switch err := sc.Err(); {
	case errors.Is(err, bufio.ErrTooLong):
		return nil, fmt.Errorf("list %s: line %d is longer than %d KiB: a list holds one image path per line (or the files of a stack joined with commas)", list, n+1, maxListLine>>10)
	case err != nil:
		return nil, fmt.Errorf("list %s: %w", list, jobkit.UnwrapPath(err))
	}
	return jobkit.ExpandImages(out)
}

// outputName applies the name template to an input; a name that would
// leave dir is refused.
func outputName(dir, template, input string) (string, error) {
	name := strings.ReplaceAll(template, "{stem}", stackStem(jobkit.SplitStack(input)))
	out := filepath.Join(dir, name)
	rel, err := filepath.Rel(filepath.Clean(dir), out)
	if err != nil || rel == "." || strings.HasPrefix(rel, "..") || filepath.IsAbs(name) {
		return "", jobkit.Usagef("--name %q: output %s would leave --out-dir %s", template, out, dir)
	}
	return out, nil
}

// stackStem names a stack in output names: the file's stem, or for several
// files the part their stems share ("LC08_..._T1" of "LC08_..._T1_B1.TIF",
// ...), else the first file's stem.
func stackStem(paths []string) string {
	stem := raster.Stem(paths[0])
	if len(paths) == 1 {
		return stem
	}
	common := stem
	for _, p := range paths[1:] {
		s := raster.Stem(p)
		n := 0
		for n < len(common) && n < len(s) && common[n] == s[n] {
			n++
		}
		common = common[:n]
	}
	if common = strings.TrimRight(common, "_-. "); common == "" {
		return stem
	}
	return common
}
