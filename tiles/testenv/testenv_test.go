package testenv

import (
	"path/filepath"
	"testing"
)

// TestMissingFailsUnderCI (issue 24, item 13): with CI set, a missing file
// or tool fails the test; without it, the test is skipped. Known by
// construction: the file and the tool do not exist.
func TestMissingFailsUnderCI(t *testing.T) {
	absent := filepath.Join(t.TempDir(), "absent.tif")
	for _, ci := range []string{"", "true"} {
		t.Setenv("CI", ci)
		for name, need := range map[string]func(testing.TB){
			"file": func(tb testing.TB) { NeedFile(tb, absent, "run make testdata") },
			"tool": func(tb testing.TB) { NeedTool(tb, "no-such-tool-bandfold", "none") },
		} {
			r := &recorder{TB: t}
			func() {
				defer func() { recover() }() // Fatal and Skip end the goroutine's test through runtime.Goexit in real tests
				need(r)
			}()
			if r.failed != (ci != "") || r.skipped != (ci == "") {
				t.Errorf("CI=%q, %s missing: failed %v, skipped %v", ci, name, r.failed, r.skipped)
			}
		}
	}
}

// recorder records Fatalf and Skip instead of ending the test; each panics
// so that the caller's code stops as it would.
type recorder struct {
	testing.TB
	failed, skipped bool
}

func (r *recorder) Helper()               {}
func (r *recorder) Fatalf(string, ...any) { r.failed = true; panic("fatal") }
func (r *recorder) Skip(...any)           { r.skipped = true; panic("skip") }
