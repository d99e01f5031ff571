package areasurvey

import (
	"math"
	"strings"
	"testing"

	"bandfold/raster"
)

// fuzzSurvey is a small survey as survey draw writes it: two strata, four
// points, labelled.
func fuzzSurvey() []byte {
	pts := &raster.Points{Metadata: map[string]string{
		MdFingerprint: "sha256:00", mdAreaUnit: "px",
		mdStrata: `[{"stratum":"no change","map_class":"no change","pixels":90,"points":2},{"stratum":"change","map_class":"change","pixels":10,"points":2}]`,
	}, Points: []raster.Point{
		{ID: 1, Stratum: "no change", MapClass: "no change", X: 0.5, Y: 0.5, Weight: 45, Reference: "no change"},
		{ID: 2, Stratum: "change", MapClass: "change", X: 1.5, Y: 0.5, Weight: 5, Reference: "change"},
		{ID: 3, Stratum: "no change", MapClass: "no change", X: 2.5, Y: 0.5, Weight: 45, Reference: "change"},
		{ID: 4, Stratum: "change", MapClass: "change", X: 3.5, Y: 0.5, Weight: 5, Reference: "change"},
	}}
	return WriteSurveyCSV(pts)
}

// leaks are words of Go's packages that a message in the user's words
// never holds.
var leaks = []string{"strconv", "json:", "parse error", "record on line", "invalid character", "unexpected EOF", "bufio", "panic", "runtime"}

// FuzzParseSurveyCSV: whatever the bytes of survey.csv, reading it and
// checking its rows never panics; every refusal is one line that starts
// with the file's name and holds no Go internals; a survey read holds only
// finite weights, and each point has its place in the file for messages.
// Seeds: the file as drawn, and as spreadsheets save it (a byte-order
// mark, CRLF, semicolons with decimal commas), known by construction.
func FuzzParseSurveyCSV(f *testing.F) {
	plain := string(fuzzSurvey())
	f.Add([]byte(plain))
	f.Add([]byte("\uFEFF" + strings.ReplaceAll(plain, "\n", "\r\n")))
	f.Add([]byte(strings.NewReplacer(",", ";", ".5", ",5").Replace(plain)))
	f.Add([]byte(strings.ReplaceAll(plain, "\n", "\r")))
	f.Add([]byte(""))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := parseSurveyCSV("s.csv", data)
		if err == nil {
			if len(s.where) != len(s.pts.Points) || len(s.tol) != len(s.pts.Points) {
				t.Fatalf("%d points, %d places, %d tolerances", len(s.pts.Points), len(s.where), len(s.tol))
			}
			for _, p := range s.pts.Points {
				if math.IsNaN(p.Weight) || math.IsInf(p.Weight, 0) {
					t.Fatalf("point %d: weight %v read", p.ID, p.Weight)
				}
			}
			if err = s.checkStrata(); err == nil {
				_, err = estimate(s)
			}
		}
		if err == nil {
			return
		}
		msg := err.Error()
		if !strings.HasPrefix(msg, "survey s.csv") || strings.ContainsAny(msg, "\n\r") {
			t.Fatalf("message %q: want one line starting with the file", msg)
		}
		for _, w := range leaks {
			if strings.Contains(msg, w) {
				t.Fatalf("message %q holds %q", msg, w)
			}
		}
	})
}

// TestFuzzSurveyEstimates: the fuzzer's first seed is a survey the
// estimate accepts (known by construction: two labelled points in each
// stratum), so the fuzzer starts from the whole path.
func TestFuzzSurveyEstimates(t *testing.T) {
	s, err := parseSurveyCSV("s.csv", fuzzSurvey())
	if err == nil {
		err = s.checkStrata()
	}
	if err == nil {
		_, err = estimate(s)
	}
	if err != nil {
		t.Fatal(err)
	}
}
