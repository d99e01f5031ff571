package areasurvey_test

import (
	"fmt"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"unicode/utf16"

	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/jobtest"
)

// asSpreadsheet rewrites a survey CSV as a spreadsheet in a locale with
// decimal commas saves it: the first line quoted and padded with empty
// cells, cells separated by semicolons, decimals written with a comma and
// the weights rounded to the two decimals shown.
func asSpreadsheet(text string) string {
	lines := strings.Split(strings.TrimSuffix(text, "\n"), "\n")
	out := []string{`"` + lines[0] + `";;;;;;;;`, strings.ReplaceAll(lines[1], ",", ";")}
	for _, l := range lines[2:] {
		f := strings.Split(l, ",")
		for k := 3; k <= 6; k++ {
			f[k] = strings.Replace(f[k], ".", ",", 1)
		}
		w, _ := strconv.ParseFloat(f[7], 64)
		f[7] = strings.Replace(fmt.Sprintf("%.2f", w), ".", ",", 1)
		out = append(out, strings.Join(f, ";"))
	}
	return strings.Join(append(out, ";;;;;;;;", ";;;;;;;;"), "\n") + "\n"
}

// utf16Text encodes text as UTF-16 LE with its byte-order mark, as a
// spreadsheet's "Unicode text".
func utf16Text(text string) string {
	b := []byte{0xFF, 0xFE}
	for _, u := range utf16.Encode([]rune(text)) {
		b = append(b, byte(u), byte(u>>8))
	}
	return string(b)
}

// TestSurveyCSVAsSpreadsheetsSaveIt (issue 24, item 10): a labelled
// survey.csv saved by a spreadsheet (a byte-order mark, CRLF or CR line
// ends, semicolons with decimal commas and rounded weights, tabs, a quoted
// first line, trailing empty rows) gives the same estimate as the file
// survey draw wrote: the map's areas (known by construction, see
// pixelSurvey). What cannot be read is refused in one line naming the file
// and saying what differs. Before, every variant but the plain file and
// CRLF failed ("no header", a missing column or "not a number").
func TestSurveyCSVAsSpreadsheetsSaveIt(t *testing.T) {
	dir := t.TempDir()
	mapPath, csvPath := pixelSurvey(t, dir)
	plain := readText(t, csvPath)
	cases := []struct {
		name string
		text string
		want []string // a refusal's message parts; nil for an estimate
	}{
		{"byte-order mark", "\uFEFF" + plain, nil},
		{"CRLF", strings.ReplaceAll(plain, "\n", "\r\n"), nil},
		{"CR", strings.ReplaceAll(plain, "\n", "\r"), nil},
		{"semicolons and decimal commas", asSpreadsheet(plain), nil},
		{"all of it", "\uFEFF" + strings.ReplaceAll(asSpreadsheet(plain), "\n", "\r\n"), nil},
		{"tabs", strings.ReplaceAll(plain, ",", "\t"), nil},
		{"header in capitals", strings.Replace(plain, "id,stratum,map_class", "ID,Stratum,Map_Class", 1), nil},
		{"UTF-16", utf16Text(plain), []string{"UTF-16", "save it as CSV"}},
		{"thousands separators", strings.Replace(asSpreadsheet(plain), ";33,74;", ";1.033,74;", 1), []string{"line", `weight "1.033,74"`, "without thousands separators"}},
		{"decimal comma between commas", strings.Replace(plain, ",33.7375,", `,"33,7375",`, 1), []string{"line", `weight "33,7375"`, "decimal point"}},
		{"no header", plain[:strings.Index(plain, "\n")+1] + "id stratum weight\n", []string{"line 2", "is not the header"}},
		{"column renamed", strings.Replace(plain, ",weight,", ",w,", 1), []string{"line 2", "no weight column", "want id,stratum"}},
		{"first line lost", plain[strings.Index(plain, "\n")+1:], []string{"first line", "# bandfold survey"}},
		{"quote left open", strings.Replace(plain, "\n1,", "\n\"1,", 1), []string{"line 3", "no later quote closes"}},
	}
	for _, c := range cases {
		path := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_")+".csv")
		writeText(t, path, c.text)
		e, err := areasurvey.SurveyEstimate(t.Context(), jobtest.TestEnv, areasurvey.SurveyEstimateOptions{Dir: mapPath, Survey: path, Overwrite: true})
		if c.want != nil {
			jobtest.WantError(t, c.name, err, false, append(c.want, path)...)
			if err != nil && strings.Contains(err.Error(), "\n") {
				t.Errorf("%s: message of more than one line", c.name)
			}
			continue
		}
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		wantAreas(t, c.name, e)
		if e.Labelled != pxDrawn || e.Missing != 0 {
			t.Errorf("%s: %d labelled, %d missing, want %d and 0", c.name, e.Labelled, e.Missing, pxDrawn)
		}
	}
}
