package jobtest

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
	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// Main sets GDAL and the BLAS up once, as the command does, on the same
// OpenBLAS kernel (benchmarks measure what users run), and runs the tests:
// the TestMain of every package testing jobs.
func Main(m *testing.M) {
	openblas.Restart()
	if err := raster.Init(raster.Config{CacheMB: 32}); err != nil {
		panic(err)
	}
	openblas.Use()
	os.Exit(m.Run())
}

// Landsat is the real test scene: a Landsat 7 ETM+ 6-band Byte subset
// (349 x 352, UTM, public-domain USGS imagery, every pixel valid) shipped
// in Debian's r-cran-stars package as tif/L7_ETMs.tif and fetched by
// "make testdata" (scripts/testdata.sh).
const Landsat = "../../../../testdata/external/L7_ETMs.tif"

// LandsatPixels is the subset's size, 349 x 352, all valid: known from
// gdalinfo of the file.
const LandsatPixels = 349 * 352

func NeedLandsat(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(Landsat); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("testdata/external/L7_ETMs.tif missing under CI: make testdata failed")
		}
		t.Skip("testdata/external/L7_ETMs.tif missing: run make testdata")
	}
}

// TestEnv is the Env of every job run by these tests.
var TestEnv = jobkit.Env{Workers: 2, Version: "test"}

// WorkersEnv is TestEnv with n workers.
func WorkersEnv(n int) jobkit.Env {
	env := TestEnv
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

// LoggingEnv is TestEnv with warnings collected in the returned buffer.
func LoggingEnv() (jobkit.Env, *logBuffer) {
	lb := &logBuffer{}
	env := TestEnv
	env.Log = slog.New(slog.NewTextHandler(lb, &slog.HandlerOptions{Level: slog.LevelWarn}))
	return env, lb
}

func RelClose(a, b, rel float64) bool {
	return math.Abs(a-b) <= rel*math.Max(math.Abs(a), math.Abs(b))
}

// WantError checks that err is an error whose message contains every part
// of want and that it is a usage error exactly when usage is set.
func WantError(t *testing.T, name string, err error, usage bool, want ...string) {
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
	if jobkit.IsUsage(err) != usage {
		t.Errorf("%s: IsUsage = %v, want %v for %q", name, jobkit.IsUsage(err), usage, msg)
	}
}

// MustNotExist fails when path exists.
func MustNotExist(t *testing.T, name, path string) {
	t.Helper()
	if _, err := os.Stat(path); err == nil {
		t.Errorf("%s: %s was written", name, path)
	} else if !os.IsNotExist(err) {
		t.Errorf("%s: stat %s: %v", name, path, err)
	}
}

// NoTemporaries fails when dir holds hidden files: the temporary names of
// the output lifecycle.
func NoTemporaries(t *testing.T, dir string) {
	t.Helper()
	left, err := filepath.Glob(filepath.Join(dir, ".*"))
	if err != nil {
		t.Fatal(err)
	}
	if len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// DefaultVariance is the command's default --variance.
const DefaultVariance = 0.99

// Learn runs Learn, which must succeed; a zero Variance is the command's
// default.
func Learn(t *testing.T, env jobkit.Env, o learn.LearnOptions) *learn.LearnResult {
	t.Helper()
	if o.Variance == 0 {
		o.Variance = DefaultVariance
	}
	res, err := learn.Learn(t.Context(), env, o)
	if err != nil {
		t.Fatalf("learn %v: %v", o.Scenes, err)
	}
	return res
}

// LearnLandsat fits a covariance basis on the whole Landsat subset into
// dir and returns the basis and its path.
func LearnLandsat(t *testing.T, dir string) (*transform.Basis, string) {
	t.Helper()
	path := filepath.Join(dir, "landsat.basis.json")
	return Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{Landsat}, Out: path}).Basis, path
}

// Fold runs Fold, which must succeed.
func Fold(t *testing.T, env jobkit.Env, o fold.FoldOptions) *fold.FoldScene {
	t.Helper()
	res, err := fold.Fold(t.Context(), env, o)
	if err != nil {
		t.Fatalf("fold %v: %v", o.Scenes, err)
	}
	return res
}

// Synth writes an invented cube of correlated bands with Synth.
func Synth(t *testing.T, path string, bands, width, height int, seed uint64) {
	t.Helper()
	_, err := demo.Synth(t.Context(), TestEnv, demo.SynthOptions{Bands: bands, Width: width, Height: height, Type: "int16",
		Block: 16, Interleave: "pixel", Out: path, Seed: seed})
	if err != nil {
		t.Fatal(err)
	}
}

// ScenarioFiles writes the invented Vessel scenario of side size into dir.
func ScenarioFiles(t *testing.T, dir string, size int, seed uint64) demo.DemoFiles {
	t.Helper()
	o := &demo.DemoOptions{Dir: dir, Size: size, Seed: seed}
	if _, err := demo.WriteScenario(t.Context(), TestEnv, o); err != nil {
		t.Fatal(err)
	}
	return o.Files()
}

// ReadImage reads window tl of every band of the raster at path (the whole
// image when tl has no size), pixel-major, with the validity flags.
func ReadImage(t *testing.T, path string, tl tiles.Tile) (*raster.Stack, []float64, []bool) {
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

// ReadValid returns the valid pixels of the raster at path as an n x p
// matrix, for in-memory reference computations.
func ReadValid(t *testing.T, path string) *mat.Dense {
	t.Helper()
	s, buf, valid := ReadImage(t, path, tiles.Tile{})
	p := s.Len()
	var rows []float64
	for i, ok := range valid {
		if ok {
			rows = append(rows, buf[i*p:(i+1)*p]...)
		}
	}
	return mat.NewDense(len(rows)/p, p, rows)
}

// WriteRasterFile writes buf (pixel-major, spec.Bands values per pixel) as
// the whole raster described by spec at path.
func WriteRasterFile(t *testing.T, path string, spec raster.Spec, buf []float64) {
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

// NoisyCopy writes the Landsat subset plus Gaussian noise that is correlated
// across bands (a shared component and a per-band one, with band-dependent
// sizes) and a radiometric offset per band: a second "date" on which
// nothing changed.
func NoisyCopy(t *testing.T, path string, seed uint64, offset float64) {
	t.Helper()
	s, buf, _ := ReadImage(t, Landsat, tiles.Tile{})
	p := s.Len()
	rng := rand.New(rand.NewPCG(seed, 99))
	for i := range s.Width * s.Height {
		shared := rng.NormFloat64()
		for b := range p {
			buf[i*p+b] += 1.5*shared*float64(b%3+1)/2 + float64(b+1)*0.4*rng.NormFloat64() + offset*float64(b+1)
		}
	}
	WriteRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"}, buf)
}

// CopyWindow writes the pixels of src from column x0, row y0 onwards onto
// grid g at dst, keeping nodata.
func CopyWindow(t *testing.T, src, dst string, g raster.Grid, x0, y0 int) {
	t.Helper()
	s, buf, valid := ReadImage(t, src, tiles.Tile{X: x0, Y: y0, W: g.Width, H: g.Height})
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
	WriteRasterFile(t, dst, raster.Spec{Grid: g, Bands: p, DataType: s.Bands[0].DataType, NoData: &nd}, buf)
}

// WriteNamed copies the pixels of src (all valid) to path with the given
// band descriptions.
func WriteNamed(t *testing.T, path, src string, names []string) {
	t.Helper()
	s, buf, valid := ReadImage(t, src, tiles.Tile{})
	for i, ok := range valid {
		if !ok {
			t.Fatalf("%s: pixel %d is not valid", src, i)
		}
	}
	WriteRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: len(names), DataType: "Float32", Descriptions: names}, buf)
}

// RunChange runs Change, which must succeed.
func RunChange(t *testing.T, env jobkit.Env, o pairchange.ChangeOptions) *changefolder.ChangeResult {
	t.Helper()
	res, err := pairchange.Change(t.Context(), env, o)
	if err != nil {
		t.Fatalf("change %s %s: %v", o.Before, o.After, err)
	}
	return res
}

func CopyFile(t *testing.T, src, dst string) {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dst, data, 0o644); err != nil {
		t.Fatal(err)
	}
}
