package main

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"bandfold/tiles/testenv"
)

// walkthroughDoc is the walkthrough on the real Landsat files.
const walkthroughDoc = "../../docs/walkthrough.md"

// consoleBlock is a ```console block: its command ("$ ..." line) and the
// output shown under it.
var consoleBlock = regexp.MustCompile("(?s)```console\n\\$ ([^\n]*)\n(.*?)```")

// volatile hides what changes from run to run: durations, creation times,
// the tool's version.
var volatile = regexp.MustCompile(`\d+(\.\d+)? s\b|\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ`)

// TestWalkthrough runs the commands of docs/walkthrough.md in order, in one
// shell, in a folder holding the real Landsat files of make testdata as
// landsat/, with this build of bandfold on the PATH, and compares each
// command's output with the output the page shows (durations aside);
// -update-docs (make docs) writes the outputs into the page instead.
func TestWalkthrough(t *testing.T) {
	landsat, err := filepath.Abs("../../testdata/external/landsat")
	if err != nil {
		t.Fatal(err)
	}
	testenv.NeedFile(t, landsat, "make testdata")
	testenv.NeedTool(t, "awk", "gawk or mawk")
	dir := t.TempDir()
	bin := filepath.Join(dir, "bin")
	if out, err := exec.Command("go", "build", "-o", filepath.Join(bin, "bandfold"), ".").CombinedOutput(); err != nil {
		t.Fatalf("go build: %v: %s", err, out)
	}
	work := filepath.Join(dir, "work")
	if err := os.MkdirAll(work, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(landsat, filepath.Join(work, "landsat")); err != nil {
		t.Fatal(err)
	}
	page, err := os.ReadFile(walkthroughDoc)
	if err != nil {
		t.Fatal(err)
	}
	blocks := consoleBlock.FindAllStringSubmatch(string(page), -1)
	if len(blocks) < 6 {
		t.Fatalf("the walkthrough holds %d commands", len(blocks))
	}
	outputs := runInOneShell(t, work, bin, blocks)
	if *updateDocs {
		i := 0
		text := consoleBlock.ReplaceAllStringFunc(string(page), func(string) string {
			b := "```console\n$ " + blocks[i][1] + "\n" + outputs[i] + "```"
			i++
			return b
		})
		if err := os.WriteFile(walkthroughDoc, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	for i, b := range blocks {
		if volatile.ReplaceAllString(outputs[i], "T") != volatile.ReplaceAllString(b[2], "T") {
			t.Errorf("$ %s\nprints:\n%s\nbut the walkthrough shows:\n%s(make docs rewrites it)", b[1], outputs[i], b[2])
		}
	}
}

// runInOneShell runs the blocks' commands in one bash, so that variables
// carry from one to the next, and returns each one's output (stdout and
// stderr, as a terminal shows them, with its exit code when not 0).
func runInOneShell(t *testing.T, work, bin string, blocks [][]string) []string {
	t.Helper()
	var script strings.Builder
	for i, b := range blocks {
		fmt.Fprintf(&script, "echo '@@@%d'\n%s 2>&1 || echo \"exit $?\"\n", i, b[1])
	}
	cmd := exec.Command("bash", "-c", script.String())
	cmd.Dir = work
	cmd.Env = append(os.Environ(), "PATH="+bin+string(os.PathListSeparator)+os.Getenv("PATH"), "COLUMNS=100")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("the walkthrough's shell: %v: %s", err, out)
	}
	parts := regexp.MustCompile(`(?m)^@@@\d+\n`).Split(string(out), -1)[1:]
	if len(parts) != len(blocks) {
		t.Fatalf("%d outputs for %d commands", len(parts), len(blocks))
	}
	return parts
}
