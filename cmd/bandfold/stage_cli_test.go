package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestStagesOnTheCommandLine runs change and timeline in stages through
// the command line as a Slurm array runs them (--shard auto from the
// array's environment): each scan and map prints its stage result as
// JSON, the finish writes the folder a single run writes (its rasters and
// change's preview byte for byte, known by construction: the stages
// compute the single run's sums, sample and fit), and a stage flag out of
// place is a usage error.
func TestStagesOnTheCommandLine(t *testing.T) {
	dir := t.TempDir()
	p := func(name string) string { return filepath.Join(dir, name) }
	var scenes []string
	for i, year := range []string{"2019", "2020", "2021"} {
		scenes = append(scenes, p("site-"+year+".tif"))
		// Wider than a preview (1,024 pixels): change's preview is
		// gathered during the map pass, in a staged run by the map stages.
		mustRun(t, "demo", "synth", "--bands", "4", "--width", "1100", "--height", "40", "--seed", fmt.Sprint(i+1), "--out", scenes[i], "--quiet")
	}
	cases := []struct {
		command string
		args    []string
		rasters []string
	}{
		{"change", scenes[:2], []string{"change.tif", "magnitude.tif", "preview.png"}},
		{"timeline", scenes, []string{"steps.tif", "first-change.tif", "max-magnitude.tif"}},
	}
	for _, c := range cases {
		single, staged := p(c.command+"-single"), p(c.command+"-staged")
		common := append(append([]string{c.command}, c.args...), "--tile", "32", "--quiet")
		mustRun(t, append(common, "--out", single)...)
		for _, stage := range []string{"scan", "fit", "map"} {
			tasks := 1
			if stage != "fit" {
				tasks = 3
			}
			for i := range tasks {
				t.Setenv("SLURM_ARRAY_TASK_ID", fmt.Sprint(i))
				t.Setenv("SLURM_ARRAY_TASK_MIN", "0")
				t.Setenv("SLURM_ARRAY_TASK_MAX", "2")
				t.Setenv("SLURM_ARRAY_TASK_COUNT", "3")
				args := append(common, "--out", staged, "--stage", stage, "--json")
				if stage != "fit" {
					args = append(args, "--shard", "auto")
				}
				var res struct{ Format, Stage, Shard, File string }
				if err := json.Unmarshal([]byte(mustRun(t, args...)), &res); err != nil {
					t.Fatalf("%s --stage %s: %v", c.command, stage, err)
				}
				if res.Format != "bandfold-stage-result" || res.Stage != stage || !strings.HasPrefix(res.File, staged+".stages") {
					t.Errorf("%s --stage %s: printed %+v", c.command, stage, res)
				}
				if want := fmt.Sprintf("%d/3", i); stage != "fit" && res.Shard != want {
					t.Errorf("%s --stage %s: shard %s, want %s from the array's environment", c.command, stage, res.Shard, want)
				}
			}
		}
		mustRun(t, append(common, "--out", staged, "--stage", "finish")...)
		for _, f := range c.rasters {
			a, err1 := os.ReadFile(filepath.Join(single, f))
			b, err2 := os.ReadFile(filepath.Join(staged, f))
			if err1 != nil || err2 != nil || string(a) != string(b) {
				t.Errorf("%s: %s of the staged run differs from the single run's (%v %v)", c.command, f, err1, err2)
			}
		}
		for _, bad := range [][]string{{"--stage", "later"}, {"--stage", "fit", "--shard", "1/2"}} {
			code, _, errs := bandfold(t, append(append(common, "--out", p("bad")), bad...)...)
			if code != 2 || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
				t.Errorf("%s %s: exit %d, stderr %q; want 2 and one line", c.command, strings.Join(bad, " "), code, errs)
			}
		}
	}
}
