package jobtest

import (
	"bandfold/cmd/bandfold/internal/areasurvey"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bytes"
	"fmt"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// browserCheck is appended to a copy of a report before rendering: it
// writes, into the DOM, how many images loaded (naturalWidth > 0), so that
// --dump-dom shows it. The report itself holds no script.
const browserCheck = `<script>window.addEventListener("load", function () {
var imgs = document.images, ok = 0;
for (var i = 0; i < imgs.length; i++) { if (imgs[i].complete && imgs[i].naturalWidth > 0) ok++; }
document.body.setAttribute("data-images", imgs.length + "/" + ok);
});</script>`

// noBrowser skips a browser test where chromium is missing, except under
// CI (CI=true, as .ci/run is run), where make test installed it: there a
// missing browser fails rather than passing unseen.
func noBrowser(t *testing.T) {
	t.Helper()
	if os.Getenv("CI") != "" {
		t.Fatal("chromium is not installed although CI is set: make deps should have installed Debian's chromium")
	}
	t.Skip("chromium is not installed (make deps installs Debian's chromium): reports not rendered in a browser")
}

// renderInBrowser renders the report at path with headless Chromium: a PNG
// screenshot of 1200 x 1600 and the DOM after load. It checks the page is
// not blank, every image loaded and want is in the rendered text.
func renderInBrowser(t *testing.T, path string, want ...string) {
	t.Helper()
	chromium, err := exec.LookPath("chromium")
	if err != nil {
		noBrowser(t)
	}
	html, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, bad := range []string{"<script", "http://", "https://", "<link"} {
		if strings.Contains(string(html), bad) {
			t.Errorf("%s is not self-contained: it holds %q", path, bad)
		}
	}
	dir := t.TempDir()
	probe := filepath.Join(dir, "probe.html")
	os.WriteFile(probe, bytes.Replace(html, []byte("</body>"), []byte(browserCheck+"</body>"), 1), 0o666)
	shot := filepath.Join(dir, "shot.png")
	flags := []string{"--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars", "--window-size=1200,1600", "--virtual-time-budget=5000", "--user-data-dir=" + filepath.Join(dir, "profile")}
	if out, err := exec.Command(chromium, append(flags, "--screenshot="+shot, "file://"+probe)...).CombinedOutput(); err != nil {
		t.Fatalf("chromium screenshot: %v: %s", err, out)
	}
	dom, err := exec.Command(chromium, append(flags, "--dump-dom", "file://"+probe)...).Output()
	if err != nil {
		t.Fatalf("chromium --dump-dom: %v", err)
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != 1200 || b.Dy() != 1600 {
		t.Errorf("screenshot %v, want 1200 x 1600", b)
	}
	colours := map[uint32]bool{}
	for y := 0; y < img.Bounds().Dy(); y += 7 {
		for x := 0; x < img.Bounds().Dx(); x += 7 {
			r, g, b, _ := img.At(x, y).RGBA()
			colours[r>>8<<16|g>>8<<8|b>>8] = true
		}
	}
	if len(colours) < 10 {
		t.Errorf("the screenshot looks blank: %d colours", len(colours))
	}
	text := string(dom)
	i := strings.Index(text, `data-images="`)
	if i < 0 {
		t.Fatalf("the load check did not run; DOM starts %.200s", text)
	}
	var total, loaded int
	if _, err := fmt.Sscanf(text[i+len(`data-images="`):], "%d/%d", &total, &loaded); err != nil || total == 0 || loaded != total {
		t.Errorf("%d of %d images loaded (%v)", loaded, total, err)
	}
	for _, w := range append(want, "screening result", "local regulations and licensed practice") {
		if !strings.Contains(text, w) {
			t.Errorf("rendered %s lacks %q", filepath.Base(path), w)
		}
	}
	t.Logf("%s: %d of %d images loaded, %d colours sampled", filepath.Base(path), loaded, total, len(colours))
	// Printed (A4 from Chromium), the report takes a sensible number of
	// pages: its content, not a title page or tables split line by line.
	pdf := filepath.Join(dir, "report.pdf")
	if out, err := exec.Command(chromium, append(flags, "--no-pdf-header-footer", "--print-to-pdf="+pdf, "file://"+probe)...).CombinedOutput(); err != nil {
		t.Fatalf("chromium --print-to-pdf: %v: %s", err, out)
	}
	raw, err := os.ReadFile(pdf)
	if err != nil {
		t.Fatal(err)
	}
	pages := len(regexp.MustCompile(`/Type\s*/Page[^s]`).FindAll(raw, -1))
	if pages < 1 || pages > maxPages {
		t.Errorf("%s prints on %d pages, want 1 to %d", filepath.Base(path), pages, maxPages)
	}
	t.Logf("%s: %d pages printed", filepath.Base(path), pages)
}

// maxPages is the most pages a report may print on: about a page per
// figure and table.
const maxPages = 8

// TestReportsInBrowser renders the change report (with a survey estimate)
// and the inspect report in headless Chromium.
func TestReportsInBrowser(t *testing.T) {
	if _, err := exec.LookPath("chromium"); err != nil {
		noBrowser(t)
	}
	dir := t.TempDir()
	f := ScenarioFiles(t, dir, 256, 7)
	out := filepath.Join(dir, "chg")
	s := RunChange(t, TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, Reference: f.Truth, SharedOptions: series.SharedOptions{Out: out}})
	renderInBrowser(t, filepath.Join(out, "report.html"), "Mapped change", "mapped area of change", s.BeforeLabel, "No survey yet")
	gpkg := filepath.Join(dir, "survey.gpkg")
	if _, err := areasurvey.SurveyDraw(t.Context(), TestEnv, areasurvey.SurveyDrawOptions{Dir: out, Out: gpkg, Points: 120, Buffer: "0", MinPerStratum: 40, Seed: 1}); err != nil {
		t.Fatal(err)
	}
	csvData, _ := os.ReadFile(filepath.Join(dir, "survey.csv"))
	lines := strings.Split(strings.TrimSpace(string(csvData)), "\n")
	for i := 2; i < len(lines); i++ {
		lines[i] += strings.Split(lines[i], ",")[2] // the map class as the label
	}
	os.WriteFile(filepath.Join(dir, "survey.csv"), []byte(strings.Join(lines, "\n")+"\n"), 0o666)
	est, err := areasurvey.SurveyEstimate(t.Context(), TestEnv, areasurvey.SurveyEstimateOptions{Dir: out, Survey: filepath.Join(dir, "survey.csv")})
	if err != nil {
		t.Fatal(err)
	}
	renderInBrowser(t, filepath.Join(out, "report.html"), "Estimated area from the reference survey", "95% interval", report.Num(est.Classes[0].AreaHa, 2))
	basis, _ := learnLandsatOrSynth(t, dir)
	plots := filepath.Join(dir, "plots")
	if _, err := learn.Inspect(t.Context(), TestEnv, learn.InspectOptions{Basis: basis, Plots: plots}); err != nil {
		t.Fatal(err)
	}
	renderInBrowser(t, filepath.Join(plots, "report.html"), "Variance by component", "PC1")
}

// learnLandsatOrSynth fits a basis on a small synthetic cube.
func learnLandsatOrSynth(t *testing.T, dir string) (string, error) {
	cube := filepath.Join(dir, "cube.tif")
	Synth(t, cube, 6, 64, 64, 1)
	basis := filepath.Join(dir, "cube.basis.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{cube}, Out: basis})
	return basis, nil
}
