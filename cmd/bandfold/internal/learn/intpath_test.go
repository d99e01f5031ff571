package learn_test

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
	"bandfold/tiles/testenv"
	"bandfold/transform"
)

// integerScene is an input of 8- or 16-bit integer bands, which the
// integer kernel takes (jobkit.IntegerKernel).
type integerScene struct {
	name  string
	scene string
	input jobkit.Input
}

// integerScenes are the Landsat fixtures of make testdata in each integer
// layout they come in (Byte; Int16 band files with nodata and a quality
// mask; a Level-2 product's UInt16 bands with nodata 0 and QA_PIXEL), and
// the invented cubes of make bench (bandfold demo synth: Int16 and UInt16,
// small), written into dir.
func integerScenes(t *testing.T, dir string) []integerScene {
	t.Helper()
	jobtest.NeedLandsat(t)
	const ext = "../../../../testdata/external"
	join := func(dir, prefix, suffix string, bands ...string) string {
		var paths []string
		for _, b := range bands {
			p := filepath.Join(ext, dir, prefix+b+suffix)
			testenv.NeedFile(t, p, "make testdata")
			paths = append(paths, p)
		}
		return strings.Join(paths, ",")
	}
	l8 := "LC08_L1TP_195025_20130707_20170503_01_T1"
	l2 := "LC08_L2SP_195025_20130707_20200912_02_T1"
	bqa, err := raster.ParseMask(filepath.Join(ext, "landsat", l8+"_BQA.TIF") + ":bits=0,4")
	if err != nil {
		t.Fatal(err)
	}
	qa, err := raster.ParseMask(filepath.Join(ext, "products", l2, l2+"_QA_PIXEL.TIF") + ":qa_pixel=fill,clouds")
	if err != nil {
		t.Fatal(err)
	}
	cube224, scene7 := filepath.Join(dir, "cube224.tif"), filepath.Join(dir, "scene7.tif")
	for _, o := range []demo.SynthOptions{
		{Bands: 224, Width: 64, Height: 53, Type: "int16", Block: 16, Interleave: "pixel", Out: cube224, Seed: 1},
		{Bands: 7, Width: 150, Height: 131, Type: "uint16", Block: 32, Interleave: "band", Out: scene7, Seed: 2},
	} {
		if _, err := demo.Synth(t.Context(), jobtest.TestEnv, o); err != nil {
			t.Fatal(err)
		}
	}
	return []integerScene{
		{"Landsat 7 Byte", jobtest.Landsat, jobkit.Input{}},
		{"Landsat 8 Int16 band files, BQA mask", join("landsat", l8+"_B", ".TIF", "1", "2", "3", "4", "5", "6", "7"), jobkit.Input{Masks: []raster.MaskRule{bqa}}},
		{"Landsat 8 Level-2 UInt16, QA_PIXEL", join("products/"+l2, l2+"_SR_B", ".TIF", "2", "3", "4", "5", "6", "7"), jobkit.Input{Masks: []raster.MaskRule{qa}}},
		{"synth 224 bands Int16", cube224, jobkit.Input{}},
		{"synth 7 bands UInt16", scene7, jobkit.Input{}},
	}
}

// setIntegerKernel sets jobkit.IntegerKernel for the rest of the test.
func setIntegerKernel(t *testing.T, on bool) {
	old := jobkit.IntegerKernel
	jobkit.IntegerKernel = on
	t.Cleanup(func() { jobkit.IntegerKernel = old })
}

// TestIntegerKernelGivesTheSameBasis: on every integer fixture, the basis
// of the integer path (jobkit.IntegerKernel: int16 tiles read ahead,
// bands.AddInt16Tile, AddInt16Window, AddInt16Pairs) is the one of the
// float64 path bit for bit (the fingerprint hashes the IEEE 754 bits of
// every fitted number), for PCA with and without a stride and MNF on
// horizontal and on both pairs, for 1 to 3 workers, tiles of 7 pixels to
// block-aligned ones, and 3 shards merged. Known by construction: both
// paths form the same exact integer sums (bands.NewExactAccumulator).
func TestIntegerKernelGivesTheSameBasis(t *testing.T) {
	dir := t.TempDir()
	methods := []struct {
		name   string
		method transform.Method
		noise  bands.Shift
		stride int
	}{
		{"pca", transform.PCA, 0, 1},
		{"pca stride 3", transform.PCA, 0, 3},
		{"mnf", transform.MNF, bands.Horizontal, 1},
		{"mnf both", transform.MNF, bands.Both, 1},
	}
	runs := []struct {
		workers, tile, shards int
	}{{1, 0, 1}, {2, 0, 1}, {3, 7, 1}, {2, 33, 1}, {2, 16, 3}}
	n := 0
	for _, sc := range integerScenes(t, dir) {
		s, err := jobkit.OpenImage(sc.scene, nil)
		if err != nil {
			t.Fatal(err)
		}
		if _, ok := s.Int16Shifts(); !ok {
			t.Fatalf("%s: the integer kernel does not take it", sc.name)
		}
		s.Close()
		for _, m := range methods {
			learnIt := func(integer bool, workers, tile, shards int) string {
				t.Helper()
				setIntegerKernel(t, integer)
				n++
				o := learn.LearnOptions{Scenes: []string{sc.scene}, Input: sc.input, Method: m.method, Noise: m.noise, Stride: m.stride}
				o.Input.Tile = tile
				env := jobtest.WorkersEnv(workers)
				if shards == 1 {
					o.Out = filepath.Join(dir, fmt.Sprintf("b%d.json", n))
					return jobtest.Learn(t, env, o).Basis.Fingerprint()
				}
				var parts []string
				for i := range shards {
					o.Partial, o.Shard = filepath.Join(dir, fmt.Sprintf("p%d-%d.json", n, i)), jobkit.Shard{I: i, N: shards}
					parts = append(parts, jobtest.Learn(t, env, o).Path)
				}
				res, err := learn.Merge(context.Background(), env, learn.MergeOptions{Parts: parts, Out: filepath.Join(dir, fmt.Sprintf("m%d.json", n)), Variance: jobtest.DefaultVariance})
				if err != nil {
					t.Fatal(err)
				}
				return res.Basis.Fingerprint()
			}
			want := learnIt(false, 1, 0, 1)
			for _, r := range runs {
				if got := learnIt(true, r.workers, r.tile, r.shards); got != want {
					t.Errorf("%s, %s, %d workers, tile %d, %d shards: integer kernel's basis %s, float64 path's %s",
						sc.name, m.name, r.workers, r.tile, r.shards, got, want)
				}
			}
			// The float64 path at the finest split, for completeness.
			if got := learnIt(false, 3, 7, 1); got != want {
				t.Errorf("%s, %s: float64 path at 3 workers, tile 7: basis %s, at 1 worker and block tiles %s", sc.name, m.name, got, want)
			}
		}
	}
}
