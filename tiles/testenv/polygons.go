package testenv

import (
	"encoding/json"
	"math"
	"os/exec"
	"testing"
)

// Polygon is a polygon feature read back by GDAL's ogr2ogr: its numeric
// properties (nil for a null) and its planar area in the layer's units
// (holes taken off).
type Polygon struct {
	Properties map[string]*float64
	Area       float64
	// Box is the polygon's bounding box: min x, min y, max x, max y.
	Box [4]float64
}

// ReadPolygons reads a layer of a vector file with GDAL's own ogr2ogr, as
// GeoJSON: an outside check of what bandfold wrote. crs is the GeoJSON crs
// name.
func ReadPolygons(t testing.TB, path, layer string) (polys []Polygon, crs string) {
	t.Helper()
	NeedTool(t, "ogr2ogr", "gdal-bin")
	out, err := exec.Command("ogr2ogr", "-f", "GeoJSON", "/vsistdout/", path, layer).Output()
	if err != nil {
		t.Fatalf("ogr2ogr %s: %v", path, err)
	}
	var fc struct {
		CRS struct {
			Properties struct{ Name string }
		}
		Features []struct {
			Properties map[string]*float64
			Geometry   struct {
				Type        string
				Coordinates [][][2]float64
			}
		}
	}
	if err := json.Unmarshal(out, &fc); err != nil {
		t.Fatalf("ogr2ogr %s: %v", path, err)
	}
	for _, f := range fc.Features {
		if f.Geometry.Type != "Polygon" {
			t.Errorf("a %s in %s, want polygons", f.Geometry.Type, path)
		}
		p := Polygon{Properties: f.Properties, Box: [4]float64{math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)}}
		for k, ring := range f.Geometry.Coordinates {
			a := math.Abs(PlanarArea(ring))
			if k > 0 {
				a = -a // a hole
			}
			p.Area += a
			for _, v := range ring {
				p.Box = [4]float64{min(p.Box[0], v[0]), min(p.Box[1], v[1]), max(p.Box[2], v[0]), max(p.Box[3], v[1])}
			}
		}
		polys = append(polys, p)
	}
	return polys, fc.CRS.Properties.Name
}

// PlanarArea returns the signed area of a closed ring by the shoelace
// formula, taken about the first vertex to keep large coordinates exact.
func PlanarArea(ring [][2]float64) float64 {
	var s float64
	for i := range ring {
		j := (i + 1) % len(ring)
		s += (ring[i][0]-ring[0][0])*(ring[j][1]-ring[0][1]) - (ring[j][0]-ring[0][0])*(ring[i][1]-ring[0][1])
	}
	return s / 2
}
