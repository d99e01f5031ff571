package pairchange_test

import (
	"encoding/json"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// sensorPair writes, from the real Landsat 7 subset, a BEFORE (the subset
// plus noise) and an AFTER on another radiometric scale, as between two
// sensors' digital numbers: after = offset + gain x (subset + noise) per
// band with gains of 20 to 60, and a changed square (NIR up 30 DN, red down
// 15 DN before scaling). It returns the paths, the reference raster of the
// square, the gains and offsets and each band's range over BEFORE.
func sensorPair(t *testing.T, dir string) (before, after, ref string, gains, offsets, ranges []float64) {
	t.Helper()
	s, buf, _ := jobtest.ReadImage(t, jobtest.Landsat, tiles.Tile{})
	p := s.Len()
	gains = []float64{20, 35, 60, 25, 45, 30}[:p]
	offsets = []float64{100, -50, 300, 10, 0, 200}[:p]
	rng := rand.New(rand.NewPCG(13, 1))
	xb, xa := make([]float64, len(buf)), make([]float64, len(buf))
	truth := make([]float64, s.Width*s.Height)
	lo, hi := make([]float64, p), make([]float64, p)
	for b := range p {
		lo[b], hi[b] = math.Inf(1), math.Inf(-1)
	}
	for i := range s.Width * s.Height {
		x, y := i%s.Width, i/s.Width
		patch := x >= 200 && x < 240 && y >= 100 && y < 140 // 1,600 px
		if patch {
			truth[i] = 1
		}
		for b := range p {
			v := buf[i*p+b]
			xb[i*p+b] = v + 0.5*rng.NormFloat64()
			lo[b], hi[b] = min(lo[b], xb[i*p+b]), max(hi[b], xb[i*p+b])
			w := v + 0.5*rng.NormFloat64()
			if patch && b == 3 {
				w += 30
			}
			if patch && b == 2 {
				w -= 15
			}
			xa[i*p+b] = offsets[b] + gains[b]*w
		}
	}
	for b := range p {
		ranges = append(ranges, hi[b]-lo[b])
	}
	before, after, ref = filepath.Join(dir, "l7.tif"), filepath.Join(dir, "other-sensor.tif"), filepath.Join(dir, "truth.tif")
	jobtest.WriteRasterFile(t, before, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"}, xb)
	jobtest.WriteRasterFile(t, after, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"}, xa)
	jobtest.WriteRasterFile(t, ref, raster.Spec{Grid: s.Grid, Bands: 1, DataType: "Byte"}, truth)
	return before, after, ref, gains, offsets, ranges
}

// TestChangeNormalizesTwoSensors: on the real Landsat 7 subset against a
// copy on another radiometric scale (sensorPair), the default --normalize
// stable recovers each band's gain 1/g within 0.5% and offset -o/g within 0.5%
// of the band's range (known by construction: before = (after - o) / g up
// to noise), and the map finds the changed square with recall >= 0.9 and
// false alarms <= 0.5% at the command's defaults (chisq:0.999, 4 px).
// --normalize none on the same pair warns that the dates look incomparable.
func TestChangeNormalizesTwoSensors(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	before, after, ref, gains, offsets, ranges := sensorPair(t, dir)
	out := filepath.Join(dir, "chg")
	s := jobtest.RunChange(t, jobtest.TestEnv, pairchange.ChangeOptions{Before: before, After: after, Reference: ref, SharedOptions: series.SharedOptions{Out: out, MinArea: jobkit.MinArea{Px: 4}}})
	n := s.Normalization
	if n.Method != series.NormalizeStable || !n.Applied || len(n.Bands) != len(gains) || n.StablePixels < 1000 || !strings.Contains(n.Rule, "p-value >= 0.5") {
		t.Fatalf("normalisation %+v", n)
	}
	for b, f := range n.Bands {
		wantGain, wantOffset := 1/gains[b], -offsets[b]/gains[b]
		// Within 0.5% (gain) and 0.5% of the band's range (offset): the
		// refined fit is unbiased (change.FitNormalization).
		if !jobtest.RelClose(f.Gain, wantGain, 0.005) || math.Abs(f.Offset-wantOffset) > 0.005*ranges[b] || f.Correlation < 0.9 {
			t.Errorf("band %d: gain %.6g offset %.6g correlation %.4f, want %.6g and %.6g (+- %.3g)", b+1, f.Gain, f.Offset, f.Correlation, wantGain, wantOffset, 0.005*ranges[b])
		}
		t.Logf("band %d: gain %.6g, %.3f%% off", b+1, f.Gain, 100*math.Abs(f.Gain-wantGain)/wantGain)
	}
	r := s.Reference
	if r == nil || r.Recall == nil || r.FalseAlarmRate == nil || *r.Recall < 0.9 || *r.FalseAlarmRate > 0.005 {
		t.Fatalf("reference %+v", r)
	}
	t.Logf("recall %.4f, false alarms %.5f, users %.4f, producers %.4f", *r.Recall, *r.FalseAlarmRate, *r.UsersAccuracy, *r.ProducersAccuracy)
	if r.ProducersAccuracy == nil || *r.ProducersAccuracy != *r.Recall || r.OmissionError == nil || math.Abs(*r.OmissionError+*r.Recall-1) > 1e-12 {
		t.Errorf("producer's accuracy %v, omission %v against recall %v", r.ProducersAccuracy, r.OmissionError, *r.Recall)
	}
	// The valid area is the whole subset of 28.5 m pixels: 349 x 352 x
	// 28.5² m² (gdalinfo of the file), within 1% for UTM's scale factor.
	if want := jobtest.LandsatPixels * 28.5 * 28.5; s.ValidAreaM2 == nil || !jobtest.RelClose(*s.ValidAreaM2, want, 0.01) || !jobtest.RelClose(*s.ValidAreaHa*1e4, *s.ValidAreaM2, 1e-12) {
		t.Errorf("valid area %v m2, want about %v", deref(s.ValidAreaM2), want)
	}
	// Every output says what it is: k in magnitude.tif's band description,
	// both dates and the settings in its metadata.
	mag, err := raster.Open([]string{filepath.Join(out, "magnitude.tif")})
	if err != nil {
		t.Fatal(err)
	}
	defer mag.Close()
	if want := "k = " + itoa(s.Components) + " degrees of freedom"; !strings.Contains(mag.Bands[0].Name, want) {
		t.Errorf("magnitude.tif band description %q lacks %q", mag.Bands[0].Name, want)
	}
	for _, key := range []string{"BANDFOLD_BEFORE", "BANDFOLD_AFTER", "BANDFOLD_COMPONENTS", "BANDFOLD_THRESHOLD", "BANDFOLD_Z_THRESHOLD", "BANDFOLD_MIN_AREA_PIXELS", "BANDFOLD_NORMALIZATION", "BANDFOLD_CAUTION"} {
		if mag.Metadata[key] == "" {
			t.Errorf("magnitude.tif lacks %s", key)
		}
	}
	// preview.png holds both dates side by side, each enlarged to at least
	// PreviewMin (800) px on the long side from the 349 x 352 subset.
	f, err := os.Open(filepath.Join(out, "preview.png"))
	if err != nil {
		t.Fatal(err)
	}
	cfg, err := png.DecodeConfig(f)
	f.Close()
	// 352 rows -> 800, 349 columns -> round(349 x 800 / 352) = 793.
	if pw, ph := report.PreviewSize(349, 352); ph != report.PreviewMin || pw != 793 || err != nil || cfg.Width < 2*pw+pairchange.PanelGap || cfg.Height < ph {
		t.Errorf("preview.png %dx%d (%v), panels %dx%d: want two panels of 793x800", cfg.Width, cfg.Height, err, pw, ph)
	}
	js, err := os.ReadFile(filepath.Join(out, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var raw map[string]any
	if err := json.Unmarshal(js, &raw); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"normalization", "valid_area_m2", "valid_area_ha", "warnings"} {
		if _, ok := raw[key]; !ok {
			t.Errorf("summary.json lacks %q", key)
		}
	}

	env, log := jobtest.LoggingEnv()
	jobtest.RunChange(t, env, pairchange.ChangeOptions{Before: before, After: after, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "raw"), MinArea: jobkit.MinArea{Px: 4}, Normalize: series.NormalizeNone}})
	if !strings.Contains(log.String(), "radiometrically incomparable") || !strings.Contains(log.String(), "--normalize stable") {
		t.Errorf("--normalize none on two scales: no warning in %q", log.String())
	}
}

func itoa(n int) string { return strconv.Itoa(n) }

func deref(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

// TestChangeThresholdWarnings: on a real pair where nothing changed (the
// Landsat subset and a noisy copy), the Z histogram is unimodal, so otsu
// must say its split is not to be trusted (eta below change.OtsuBound, or a
// cut below the chi-square median) and report eta. (sigma:N with N > 0 cuts
// above the median on chi-square Z: for k = 3 the mean of sqrt(Z) is
// 2·sqrt(2/π) = 1.596 against sqrt(2.366) = 1.538 at the median, so its
// warning needs a sample far from chi-square and is not exercised here.)
func TestChangeThresholdWarnings(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	jobtest.NoisyCopy(t, a, 1, 0)
	jobtest.NoisyCopy(t, b, 2, 3)
	for _, tc := range []struct {
		rule string
		want []string
	}{
		{"otsu", []string{"--threshold otsu"}},
	} {
		th, err := change.ParseThreshold(tc.rule)
		if err != nil {
			t.Fatal(err)
		}
		env, log := jobtest.LoggingEnv()
		s := jobtest.RunChange(t, env, pairchange.ChangeOptions{Before: a, After: b, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, tc.rule), Threshold: th}})
		for _, w := range tc.want {
			if !strings.Contains(log.String(), w) || len(s.Warnings) == 0 {
				t.Errorf("%s: no warning %q in %q", tc.rule, w, log.String())
			}
		}
		if tc.rule == "otsu" {
			if s.Threshold.Separability == nil {
				t.Errorf("otsu: no separability in %+v", s.Threshold)
			} else {
				t.Logf("otsu on an unchanged pair: eta %.3f, Z cut %.3g, median %.3g, flagged %s", *s.Threshold.Separability, s.Threshold.Z, s.Threshold.Median, changefolder.Percent(s.ChangedFrac))
			}
		}
	}
}
