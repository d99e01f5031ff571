package main

import (
	"encoding/json"
	"strings"
	"testing"
)

// TestUnknownCommandsAreUsageErrors (issue 24, item 8): an unknown
// subcommand or help topic is a usage error: exit 2, one clean line on
// stderr (no empty "; ;" items, no tab), nothing on stdout, and with --json
// the error object on stdout. Before, "survey drwa", "help fodl" and
// "completion tcsh" printed help and exited 0, and "--json fodl" printed
// nothing on stdout. The messages are known by construction: the command
// path and the name typed, with cobra's suggestions.
func TestUnknownCommandsAreUsageErrors(t *testing.T) {
	tests := []struct {
		argv []string
		want string
	}{
		{[]string{"survey", "drwa"}, `unknown command "drwa" for "bandfold survey" (did you mean draw?)`},
		{[]string{"help", "fodl"}, `unknown help topic "fodl" (did you mean fold?)`},
		{[]string{"help", "survey", "drwa"}, `unknown help topic "survey drwa" (did you mean draw?)`},
		{[]string{"completion", "tcsh"}, `unknown command "tcsh" for "bandfold completion"`},
		{[]string{"fodl"}, `unknown command "fodl" for "bandfold" (did you mean fold?)`},
		{[]string{"demo", "snyth"}, `"snyth"`},
	}
	for _, tc := range tests {
		name := strings.Join(tc.argv, " ")
		for _, withJSON := range []bool{false, true} {
			argv := tc.argv
			if withJSON {
				argv = append([]string{"--json"}, argv...)
			}
			code, stdout, stderr := bandfold(t, argv...)
			plain := stdout
			if withJSON {
				plain = "" // the object is checked below
			}
			checkFailure(t, badCase{name: name, code: 2, want: []string{tc.want}}, code, plain, stderr)
			if strings.Contains(stderr, "; ;") || strings.Contains(stderr, "\t") {
				t.Errorf("%s: stderr %q has an empty item or a tab", name, stderr)
			}
			if !withJSON {
				continue
			}
			var obj struct {
				Error    string `json:"error"`
				ExitCode int    `json:"exit_code"`
			}
			if err := json.Unmarshal([]byte(stdout), &obj); err != nil || obj.ExitCode != 2 || obj.Error != message(stderr) {
				t.Errorf("--json %s: stdout %q, want {\"error\": %q, \"exit_code\": 2}", name, stdout, message(stderr))
			}
		}
	}
	// Without an argument the grouping commands still print their help.
	for _, argv := range [][]string{{"survey"}, {"help", "survey"}, {"completion"}, {}} {
		if code, stdout, _ := bandfold(t, argv...); code != 0 || !strings.Contains(stdout, "Usage:") {
			t.Errorf("bandfold %s: exit %d, stdout %.60q; want its help", strings.Join(argv, " "), code, stdout)
		}
	}
}

// TestFlagValuesInUserWords (issue 24, item 10): a flag value pflag cannot
// parse is refused in the user's words, naming the flag, the value and
// what it wants, never "strconv.ParseInt: parsing ..."; exit 2. Known by
// construction: each value is not of its flag's type.
func TestFlagValuesInUserWords(t *testing.T) {
	for _, tc := range []badCase{
		{"int", []string{"learn", "x.tif", "--out", "y.json", "--stride", "x"}, 2, []string{`--stride "x": want a whole number`}},
		{"int shorthand", []string{"learn", "x.tif", "--out", "y.json", "-k", "two"}, 2, []string{`--components "two": want a whole number`}},
		{"float out of range", []string{"learn", "x.tif", "--out", "y.json", "--variance", "1e999"}, 2, []string{`--variance "1e999": out of range`}},
		{"bool", []string{"learn", "x.tif", "--out", "y.json", "--overwrite=maybe"}, 2, []string{`--overwrite "maybe": want true or false`}},
		{"uint", []string{"survey", "draw", "d", "--out", "s.gpkg", "--seed", "-1"}, 2, []string{`--seed "-1": want a whole number, 0 or more`}},
	} {
		code, stdout, stderr := bandfold(t, tc.argv...)
		checkFailure(t, tc, code, stdout, stderr)
		if strings.Contains(stderr, "strconv") || strings.Contains(stderr, "invalid argument") {
			t.Errorf("%s: %q leaks the parser", tc.name, stderr)
		}
	}
}
