package main

import (
	"flag"
	"fmt"
	"io/fs"
	"maps"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/spf13/cobra"
	"github.com/spf13/cobra/doc"

	"bandfold/cmd/bandfold/internal/cli"
)

// updateDocs rewrites docs/commands/ and docs/outputs.md from the code
// instead of comparing them ("make docs").
var updateDocs = flag.Bool("update-docs", false, "rewrite docs/commands and docs/outputs.md")

const docsDir = "../../docs"

// generatedDocs are the pages the code generates: one per command from the
// cobra tree (cobra/doc), and the table of outputs (cli.Outputs).
func generatedDocs(t *testing.T) map[string]string {
	t.Helper()
	root := newRootCommand(&globals{})
	root.DisableAutoGenTag = true
	// The default worker count is the machine's: say so, not a number.
	root.PersistentFlags().Lookup("workers").DefValue = "the number of CPUs"
	dir := t.TempDir()
	link := func(name string) string { return name }
	if err := doc.GenMarkdownTreeCustom(root, dir, func(string) string { return "" }, link); err != nil {
		t.Fatal(err)
	}
	pages := map[string]string{}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		data, err := os.ReadFile(filepath.Join(dir, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		pages[filepath.Join("commands", e.Name())] = string(data)
	}
	pages["outputs.md"] = "# Outputs\n\nEvery file each command writes, from the table the commands' help is made of (`cli.Outputs`). " +
		"Change maps and their areas are screening results: verify them against imagery or field checks; local regulations and licensed practice govern any action.\n\n" +
		cli.OutputsMarkdown()
	return pages
}

// TestDocsAreCurrent: docs/commands/ (a page per command and subcommand,
// generated from the cobra tree) and docs/outputs.md match the code; "make
// docs" rewrites them.
func TestDocsAreCurrent(t *testing.T) {
	pages := generatedDocs(t)
	if *updateDocs {
		os.RemoveAll(filepath.Join(docsDir, "commands"))
		for name, text := range pages {
			path := filepath.Join(docsDir, name)
			if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		return
	}
	for name, text := range pages {
		got, err := os.ReadFile(filepath.Join(docsDir, name))
		if err != nil || string(got) != text {
			t.Errorf("docs/%s is stale or missing: run make docs", name)
		}
	}
	have, _ := filepath.Glob(filepath.Join(docsDir, "commands", "*.md"))
	for _, p := range have {
		if _, ok := pages[filepath.Join("commands", filepath.Base(p))]; !ok {
			t.Errorf("docs/commands/%s documents no command: run make docs", filepath.Base(p))
		}
	}
}

// TestEveryCommandNamesItsOutputs: every command that writes files has them
// in cli.Outputs, so its help lists them.
func TestEveryCommandNamesItsOutputs(t *testing.T) {
	root := newRootCommand(&globals{})
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		path := strings.TrimPrefix(c.CommandPath(), "bandfold ")
		writes := c.Flags().Lookup("out") != nil || c.Flags().Lookup("plots") != nil
		if c.Runnable() && writes && len(cli.Outputs[path]) == 0 && path != "demo" {
			t.Errorf("%s writes files but cli.Outputs does not list them", path)
		}
		if len(cli.Outputs[path]) > 0 && !strings.Contains(c.Long, "Outputs:") {
			t.Errorf("the help of %s does not list its outputs", path)
		}
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(root)
}

// TestOutputsTableMatchesRuns: the files real runs write are exactly those
// cli.Outputs lists for the command (all of them, every condition being
// met: --pvalues, --differences, --preview, --plots), so the help and
// docs/outputs.md cannot forget a file or list one that is not written.
func TestOutputsTableMatchesRuns(t *testing.T) {
	dir := t.TempDir()
	p := func(name string) string { return filepath.Join(dir, name) }
	for i, d := range []string{"a-2019.tif", "b-2020.tif", "c-2021.tif"} {
		mustRun(t, "demo", "synth", "--width", "60", "--height", "50", "--bands", "4", "--seed", fmt.Sprint(i+1), "--out", p(d), "--quiet")
	}
	basis := p("run/b.json")
	runs := []struct {
		command string
		argv    []string
		folder  string            // the folder whose files are the outputs
		names   map[string]string // pattern -> file name
	}{
		{"change", []string{"change", p("a-2019.tif"), p("b-2020.tif"), "--out", p("chg"), "--pvalues", "--differences"}, p("chg"), nil},
		{"timeline", []string{"timeline", p("a-2019.tif"), p("b-2020.tif"), p("c-2021.tif"), "--out", p("tl")}, p("tl"), nil},
		{"learn", []string{"learn", p("a-2019.tif"), "--out", basis}, p("run"), map[string]string{"OUT": "b.json"}},
		{"fold", []string{"fold", p("a-2019.tif"), "--basis", basis, "--out", p("f/c.tif"), "--preview", p("f/c.png")}, p("f"),
			map[string]string{"OUT": "c.tif", "STEM.item.json": "c.item.json", "PREVIEW": "c.png"}},
		{"inspect", []string{"inspect", basis, "--plots", p("plots")}, p("plots"), map[string]string{}},
	}
	for _, r := range runs {
		mustRun(t, append(r.argv, "--quiet")...)
		want := map[string]bool{}
		for _, f := range cli.Outputs[r.command] {
			if f.When == "with --partial" {
				continue
			}
			name := strings.TrimPrefix(f.Name, "PLOTS/")
			if n, ok := r.names[name]; ok {
				name = n
			}
			want[name] = true
		}
		entries, err := os.ReadDir(r.folder)
		if err != nil {
			t.Fatal(err)
		}
		got := map[string]bool{}
		for _, e := range entries {
			got[e.Name()] = true
		}
		if !maps.Equal(got, want) {
			t.Errorf("%s wrote %v; cli.Outputs lists %v", r.command, slices.Sorted(maps.Keys(got)), slices.Sorted(maps.Keys(want)))
		}
	}
}

// TestDocLinks: every relative link of README.md, DEVELOPERS.md and docs/
// resolves to a file, and every #anchor to a heading of its page (GitHub's
// slugs: lower case, punctuation dropped, spaces as hyphens).
func TestDocLinks(t *testing.T) {
	pages := []string{"../../README.md", "../../DEVELOPERS.md", "../../examples/README.md"}
	err := filepath.WalkDir(docsDir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && strings.HasSuffix(p, ".md") {
			pages = append(pages, p)
		}
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	link := regexp.MustCompile(`\]\(([^)\s]+)\)`)
	for _, page := range pages {
		data, err := os.ReadFile(page)
		if err != nil {
			t.Fatal(err)
		}
		text := stripCode(string(data))
		for _, m := range link.FindAllStringSubmatch(text, -1) {
			target := m[1]
			if strings.Contains(target, "://") || strings.HasPrefix(target, "mailto:") {
				continue
			}
			file, anchor, _ := strings.Cut(target, "#")
			path := page
			if file != "" {
				path = filepath.Join(filepath.Dir(page), file)
			}
			if _, err := os.Stat(path); err != nil {
				t.Errorf("%s: link %s: no such file", page, target)
				continue
			}
			if anchor != "" && !slices.Contains(anchors(t, path), anchor) {
				t.Errorf("%s: link %s: no heading with that anchor", page, target)
			}
		}
	}
}

// stripCode removes fenced code blocks, whose brackets are not links.
func stripCode(text string) string {
	return regexp.MustCompile("(?s)```.*?```").ReplaceAllString(text, "")
}

// anchors are the GitHub anchors of a markdown file's headings.
func anchors(t *testing.T, path string) []string {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	drop := regexp.MustCompile(`[^\p{L}\p{N} _-]`)
	for _, line := range strings.Split(stripCode(string(data)), "\n") {
		if h, ok := strings.CutPrefix(line, "#"); ok {
			h = strings.TrimSpace(strings.TrimLeft(h, "#"))
			out = append(out, strings.ReplaceAll(drop.ReplaceAllString(strings.ToLower(h), ""), " ", "-"))
		}
	}
	return out
}
