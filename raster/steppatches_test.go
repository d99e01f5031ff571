package raster

import (
	"errors"
	"path/filepath"
	"slices"
	"testing"
)

// TestMaskFileMarks: a map on file sieves as the map in memory does (GDAL's
// own sieve on both: the known result of the patch scene), and keeps the
// marks written beside its flags through the sieve and the patches; a map
// in memory has no marks. True by construction: the marks read back are
// those written.
func TestMaskFileMarks(t *testing.T) {
	dir := t.TempDir()
	s := newPatchScene(t, utm33)
	m, err := NewMaskFile(s.g, filepath.Join(dir, "map.tif"))
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	n := sceneW * sceneH
	marks := make([]uint8, n)
	for i := range marks {
		marks[i] = uint8(i % 7)
	}
	// Written in two tiles, as workers do.
	h := sceneH / 2
	for _, y := range []int{0, h} {
		if err := m.Write(0, y, sceneW, h, s.flags[y*sceneW:], s.top[y*sceneW:]); err != nil {
			t.Fatal(err)
		}
		if err := m.WriteMarks(0, y, sceneW, h, marks[y*sceneW:]); err != nil {
			t.Fatal(err)
		}
	}
	if err := m.Sieve(4); err != nil {
		t.Fatal(err)
	}
	if got := readMask(t, m.Read); !slices.Equal(got, s.sieved()) {
		t.Errorf("sieved map on file differs at pixel %d", firstDiff(got, s.sieved()))
	}
	mag := s.writeMagnitude(t, filepath.Join(dir, "magnitude.tif"))
	if _, err := m.Patches(filepath.Join(dir, "changes.gpkg"), PatchOptions{Magnitude: mag}); err != nil {
		t.Fatal(err)
	}
	if got := readMask(t, m.ReadMarks); !slices.Equal(got, marks) {
		t.Errorf("marks differ at pixel %d after the sieve and the patches", firstDiff(got, marks))
	}
	mem := s.mask(t)
	buf := make([]uint8, n)
	for name, err := range map[string]error{
		"WriteMarks": mem.WriteMarks(0, 0, sceneW, sceneH, marks),
		"ReadMarks":  mem.ReadMarks(0, 0, sceneW, sceneH, buf),
	} {
		if !errors.Is(err, errNoMarks) {
			t.Errorf("%s on a map in memory: %v, want %v", name, err, errNoMarks)
		}
	}
}
