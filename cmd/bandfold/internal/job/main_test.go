package job

import (
	"bytes"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"

	"bandfold/bands/openblas"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// TestMain sets GDAL and the BLAS up once, as the command does, on the same
// OpenBLAS kernel (benchmarks measure what users run).
func TestMain(m *testing.M) {
	openblas.Restart()
	if err := raster.Init(raster.Config{CacheMB: 32}); err != nil {
		panic(err)
	}
	openblas.Use()
	os.Exit(m.Run())
}

// landsat is the real test scene: a Landsat 7 ETM+ 6-band Byte subset
// (349 x 352, UTM, public-domain USGS imagery, every pixel valid) shipped
// in Debian's r-cran-stars package as tif/L7_ETMs.tif and fetched by
// "make testdata" (scripts/testdata.sh).
const landsat = "../../../../testdata/external/L7_ETMs.tif"

// landsatPixels is the subset's size, 349 x 352, all valid: known from
// gdalinfo of the file.
const landsatPixels = 349 * 352

func needLandsat(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(landsat); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("testdata/external/L7_ETMs.tif missing under CI: make testdata failed")
		}
		t.Skip("testdata/external/L7_ETMs.tif missing: run make testdata")
	}
}

// testEnv is the Env of every job run by these tests.
var testEnv = Env{Workers: 2, Version: "test"}

// workersEnv is testEnv with n workers.
func workersEnv(n int) Env {
	env := testEnv
	env.Workers = n
	return env
}

// logBuffer collects what a job logs; jobs may log from several
// goroutines.
type logBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *logBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *logBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// loggingEnv is testEnv with warnings collected in the returned buffer.
func loggingEnv() (Env, *logBuffer) {
	lb := &logBuffer{}
	env := testEnv
	env.Log = slog.New(slog.NewTextHandler(lb, &slog.HandlerOptions{Level: slog.LevelWarn}))
	return env, lb
}

func relClose(a, b, rel float64) bool {
	return math.Abs(a-b) <= rel*math.Max(math.Abs(a), math.Abs(b))
}

// wantError checks that err is an error whose message contains every part
// of want and that it is a usage error exactly when usage is set.
func wantError(t *testing.T, name string, err error, usage bool, want ...string) {
	t.Helper()
	if err == nil {
		t.Errorf("%s: no error, want one containing %q", name, want)
		return
	}
	msg := err.Error()
	t.Logf("%s: %s", name, msg)
	for _, w := range want {
		if !strings.Contains(msg, w) {
			t.Errorf("%s: error %q lacks %q", name, msg, w)
		}
	}
	if IsUsage(err) != usage {
		t.Errorf("%s: IsUsage = %v, want %v for %q", name, IsUsage(err), usage, msg)
	}
}

// mustNotExist fails when path exists.
func mustNotExist(t *testing.T, name, path string) {
	t.Helper()
	if _, err := os.Stat(path); err == nil {
		t.Errorf("%s: %s was written", name, path)
	} else if !os.IsNotExist(err) {
		t.Errorf("%s: stat %s: %v", name, path, err)
	}
}

// noTemporaries fails when dir holds hidden files: the temporary names of
// the output lifecycle.
func noTemporaries(t *testing.T, dir string) {
	t.Helper()
	left, err := filepath.Glob(filepath.Join(dir, ".*"))
	if err != nil {
		t.Fatal(err)
	}
	if len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// defaultVariance is the command's default --variance.
const defaultVariance = 0.99

// learn runs Learn, which must succeed; a zero Variance is the command's
// default.
func learn(t *testing.T, env Env, o LearnOptions) *LearnResult {
	t.Helper()
	if o.Variance == 0 {
		o.Variance = defaultVariance
	}
	res, err := Learn(t.Context(), env, o)
	if err != nil {
		t.Fatalf("learn %v: %v", o.Scenes, err)
	}
	return res
}

// learnLandsat fits a covariance basis on the whole Landsat subset into
// dir and returns the basis and its path.
func learnLandsat(t *testing.T, dir string) (*transform.Basis, string) {
	t.Helper()
	path := filepath.Join(dir, "landsat.basis.json")
	return learn(t, testEnv, LearnOptions{Scenes: []string{landsat}, Out: path}).Basis, path
}

// fold runs Fold, which must succeed.
func fold(t *testing.T, env Env, o FoldOptions) *FoldScene {
	t.Helper()
	res, err := Fold(t.Context(), env, o)
	if err != nil {
		t.Fatalf("fold %v: %v", o.Scenes, err)
	}
	return res
}

// synth writes an invented cube of correlated bands with Synth.
func synth(t *testing.T, path string, bands, width, height int, seed uint64) {
	t.Helper()
	_, err := Synth(t.Context(), testEnv, SynthOptions{Bands: bands, Width: width, Height: height, Type: "int16",
		Block: 16, Interleave: "pixel", Out: path, Seed: seed})
	if err != nil {
		t.Fatal(err)
	}
}

// scenarioFiles writes the invented Vessel scenario of side size into dir.
func scenarioFiles(t *testing.T, dir string, size int, seed uint64) DemoFiles {
	t.Helper()
	o := &DemoOptions{Dir: dir, Size: size, Seed: seed}
	if _, err := writeScenario(t.Context(), testEnv, o); err != nil {
		t.Fatal(err)
	}
	return o.files()
}

// readImage reads window tl of every band of the raster at path (the whole
// image when tl has no size), pixel-major, with the validity flags.
func readImage(t *testing.T, path string, tl tiles.Tile) (*raster.Stack, []float64, []bool) {
	t.Helper()
	s, err := raster.Open([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if err := r.Close(); err != nil {
			t.Error(err)
		}
	}()
	if tl.W == 0 {
		tl = tiles.Tile{W: s.Width, H: s.Height}
	}
	buf := make([]float64, tl.Pixels()*s.Len())
	valid := make([]bool, tl.Pixels())
	if _, err := r.Read(tl, buf, valid); err != nil {
		t.Fatal(err)
	}
	return s, buf, valid
}

// readValid returns the valid pixels of the raster at path as an n x p
// matrix, for in-memory reference computations.
func readValid(t *testing.T, path string) *mat.Dense {
	t.Helper()
	s, buf, valid := readImage(t, path, tiles.Tile{})
	p := s.Len()
	var rows []float64
	for i, ok := range valid {
		if ok {
			rows = append(rows, buf[i*p:(i+1)*p]...)
		}
	}
	return mat.NewDense(len(rows)/p, p, rows)
}

// writeRasterFile writes buf (pixel-major, spec.Bands values per pixel) as
// the whole raster described by spec at path.
func writeRasterFile(t *testing.T, path string, spec raster.Spec, buf []float64) {
	t.Helper()
	o, err := raster.Create(path, spec)
	if err != nil {
		t.Fatal(err)
	}
	if err := o.Write(tiles.Tile{W: spec.Width, H: spec.Height}, buf); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
}

// noisyCopy writes the Landsat subset plus Gaussian noise that is correlated
// across bands (a shared component and a per-band one, with band-dependent
// sizes) and a radiometric offset per band: a second "date" on which
// nothing changed.
func noisyCopy(t *testing.T, path string, seed uint64, offset float64) {
	t.Helper()
	s, buf, _ := readImage(t, landsat, tiles.Tile{})
	p := s.Len()
	rng := rand.New(rand.NewPCG(seed, 99))
	for i := range s.Width * s.Height {
		shared := rng.NormFloat64()
		for b := range p {
			buf[i*p+b] += 1.5*shared*float64(b%3+1)/2 + float64(b+1)*0.4*rng.NormFloat64() + offset*float64(b+1)
		}
	}
	writeRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"}, buf)
}

// copyWindow writes the pixels of src from column x0, row y0 onwards onto
// grid g at dst, keeping nodata.
func copyWindow(t *testing.T, src, dst string, g raster.Grid, x0, y0 int) {
	t.Helper()
	s, buf, valid := readImage(t, src, tiles.Tile{X: x0, Y: y0, W: g.Width, H: g.Height})
	p := s.Len()
	if s.Bands[0].NoData == nil {
		t.Fatalf("%s has no nodata", src)
	}
	nd := *s.Bands[0].NoData
	for i, ok := range valid {
		if !ok {
			for b := range p {
				buf[i*p+b] = nd
			}
		}
	}
	writeRasterFile(t, dst, raster.Spec{Grid: g, Bands: p, DataType: s.Bands[0].DataType, NoData: &nd}, buf)
}

// writeNamed copies the pixels of src (all valid) to path with the given
// band descriptions.
func writeNamed(t *testing.T, path, src string, names []string) {
	t.Helper()
	s, buf, valid := readImage(t, src, tiles.Tile{})
	for i, ok := range valid {
		if !ok {
			t.Fatalf("%s: pixel %d is not valid", src, i)
		}
	}
	writeRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: len(names), DataType: "Float32", Descriptions: names}, buf)
}

// runChange runs Change, which must succeed.
func runChange(t *testing.T, env Env, o ChangeOptions) *ChangeResult {
	t.Helper()
	res, err := Change(t.Context(), env, o)
	if err != nil {
		t.Fatalf("change %s %s: %v", o.Before, o.After, err)
	}
	return res
}

func copyFile(t *testing.T, src, dst string) {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dst, data, 0o644); err != nil {
		t.Fatal(err)
	}
}
