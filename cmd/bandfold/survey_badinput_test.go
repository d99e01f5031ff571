package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode/utf16"
)

// surveyRows edits the data rows (after the first line and the header) of
// a survey CSV with edit(row index from 0, fields), which returns the
// rows to put in its place.
func surveyRows(text string, edit func(i int, f []string) []string) string {
	lines := strings.Split(strings.TrimSuffix(text, "\n"), "\n")
	out := lines[:2:2]
	for i, l := range lines[2:] {
		out = append(out, edit(i, strings.Split(l, ","))...)
	}
	return strings.Join(out, "\n") + "\n"
}

// TestSurveyBadInputs runs survey draw and survey estimate on the bad
// input of issue 24 (items 1, 9, 10 and 11), as TestBadInputs does for the
// other commands: exit 2 for an option value that cannot be right, 1 for
// a survey file whose data are wrong; exactly one line on stderr naming
// the option, or the file, line and problem; the same with --json; nothing
// written. Before, the draw cases were accepted or refused with exit 1
// blaming something else, and the estimate cases were accepted or refused
// in Go's words ("json: unsupported value: NaN"); the folder without a map
// was refused before too (as "open ...: no such file or directory"). The fixtures are known by construction: a classified map of
// 40 x 30 pixels of 10 m whose first 8 columns of the first 20 rows
// change, a survey of 60 points drawn from it and labelled with each
// point's map class, and copies with the one fault each case names.
func TestSurveyBadInputs(t *testing.T) {
	dir := t.TempDir()
	p := func(name string) string { return filepath.Join(dir, name) }
	scene := p("scene.tif")
	mustRun(t, "demo", "synth", "--bands", "3", "--width", "40", "--height", "30", "--out", scene, "--quiet")
	g := readAll(t, scene).Grid
	m := make([]float64, g.Width*g.Height)
	for i := range m {
		if i%g.Width < 8 && i/g.Width < 20 {
			m[i] = 1
		}
	}
	mapPath := p("map.tif")
	writeScene(t, mapPath, g, 1, "Byte", nil, m)
	mustRun(t, "survey", "draw", mapPath, "--map", mapPath, "--points", "60", "--min-per-stratum", "20", "--out", p("survey.gpkg"), "--quiet")
	drawn, err := os.ReadFile(p("survey.csv"))
	if err != nil {
		t.Fatal(err)
	}
	plain := surveyRows(string(drawn), func(_ int, f []string) []string {
		f[8] = f[2]
		return []string{strings.Join(f, ",")}
	})
	writeFile(t, p("survey.csv"), plain)
	fault := func(name string, edit func(i int, f []string) []string) string {
		writeFile(t, p(name), surveyRows(plain, edit))
		return p(name)
	}
	nanWeight := fault("nan.csv", func(i int, f []string) []string {
		if i == 4 {
			f[7] = "nan"
		}
		return []string{strings.Join(f, ",")}
	})
	doubled := fault("doubled.csv", func(i int, f []string) []string {
		if f[2] == "change" {
			return []string{strings.Join(f, ","), strings.Join(f, ",")}
		}
		return []string{strings.Join(f, ",")}
	})
	thousands := fault("thousands.csv", func(i int, f []string) []string {
		if i == 2 {
			f[7] = `"1,000.5"`
		}
		return []string{strings.Join(f, ",")}
	})
	var u16 []byte
	for _, u := range utf16.Encode([]rune(plain)) {
		u16 = append(u16, byte(u), byte(u>>8))
	}
	writeFile(t, p("unicode.csv"), "\xff\xfe"+string(u16))
	first, rest, _ := strings.Cut(plain, "\n")
	if i := strings.Index(first, "; strata="); i >= 0 {
		first = first[:i] // as bandfold wrote it before it recorded the strata
	}
	writeFile(t, p("older.csv"), first+"\n"+rest)
	notChange := p("notchange")
	if err := os.Mkdir(notChange, 0o755); err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(notChange, "notes.txt"), "not a change folder\n")
	out := p("new/s.gpkg")
	draw := func(extra ...string) []string {
		return append([]string{"survey", "draw", mapPath, "--map", mapPath, "--out", out}, extra...)
	}
	est := func(survey string) []string { return []string{"survey", "estimate", mapPath, survey} }
	acc := "change=0.7,no change=0.95"
	tests := []badCase{
		{"survey draw out a CSV", []string{"survey", "draw", mapPath, "--map", mapPath, "--points", "60", "--out", p("new/s.csv")}, 2, []string{"--out", "s.csv", "ending in .gpkg"}},
		{"survey draw points and target-se", draw("--points", "60", "--target-se", "0.05", "--expected-accuracy", acc), 2, []string{"--points 60", "--target-se 0.05", "give one of them"}},
		{"survey draw target-se nan", draw("--target-se", "nan", "--expected-accuracy", acc), 2, []string{"--target-se NaN", "standard error"}},
		{"survey draw unknown class", draw("--target-se", "0.05", "--expected-accuracy", "change=0.7,chnage=0.9"), 2, []string{"--expected-accuracy", `unknown class "chnage"`}},
		{"survey draw accuracy without target-se", draw("--points", "60", "--expected-accuracy", acc), 2, []string{"--expected-accuracy", "only with --target-se"}},
		{"survey draw no size", draw(), 2, []string{"no sample size", "--points"}},
		{"survey estimate NaN weight", est(nanWeight), 1, []string{nanWeight, "line 7", `weight "nan" is not a number`}},
		{"survey estimate pasted rows", est(doubled), 1, []string{doubled, "appears again"}},
		{"survey estimate thousands separator", est(thousands), 1, []string{thousands, "line 5", `weight "1,000.5"`, "decimal point"}},
		{"survey estimate UTF-16", est(p("unicode.csv")), 1, []string{p("unicode.csv"), "UTF-16", "save it as CSV"}},
		{"survey estimate without strata", est(p("older.csv")), 1, []string{p("older.csv"), "does not record the strata"}},
		{"survey estimate folder without a map", []string{"survey", "estimate", notChange, p("survey.csv")}, 1, []string{filepath.Join(notChange, "change.tif"), "no such file"}},
	}
	checkBadCases(t, dir, tests)
}
