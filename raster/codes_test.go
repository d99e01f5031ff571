package raster

import (
	"path/filepath"
	"testing"

	"bandfold/tiles"
)

// TestSignedByteRoundTrip: codes -128..127 written as SignedByte (GDAL
// 3.6's Byte with PIXELTYPE=SIGNEDBYTE) with nodata -128 and a band scale
// read back as code x scale, the nodata pixel invalid, under every
// compression BestCompression may pick (known by construction: integer
// codes are stored exactly).
func TestSignedByteRoundTrip(t *testing.T) {
	dir := t.TempDir()
	src, err := Open([]string{defaultRaster().write(t, filepath.Join(dir, "in.tif"))})
	if err != nil {
		t.Fatal(err)
	}
	for _, compress := range []string{"DEFLATE", BestCompression()} {
		out := filepath.Join(dir, compress+".tif")
		nd := -128.0
		spec := Spec{Grid: src.Grid, Bands: 2, DataType: SignedByte, NoData: &nd, Compress: compress,
			Scales: []float64{0.5, 2}, Offsets: []float64{0, 0}}
		o, err := Create(out, spec)
		if err != nil {
			t.Fatal(err)
		}
		tl := tiles.Tile{W: src.Width, H: src.Height}
		buf := make([]float64, tl.Pixels()*2)
		for i := range buf {
			buf[i] = float64(i%255 - 127) // -127..127
		}
		buf[0], buf[1] = nd, nd // pixel 0 is nodata
		if err := o.Write(tl, buf); err != nil {
			t.Fatal(err)
		}
		if err := o.Commit(); err != nil {
			t.Fatal(err)
		}
		s, err := Open([]string{out})
		if err != nil {
			t.Fatal(err)
		}
		if s.Bands[0].DataType != SignedByte {
			t.Errorf("%s: read as %s, want %s", compress, s.Bands[0].DataType, SignedByte)
		}
		got, valid, n := readAll(t, s)
		if valid[0] || n != tl.Pixels()-1 {
			t.Errorf("%s: nodata pixel valid %v, %d valid pixels", compress, valid[0], n)
		}
		for i := 2; i < len(buf); i++ {
			if want := buf[i] * spec.Scales[i%2]; got[i] != want {
				t.Fatalf("%s: value %d read %v, want %v", compress, i, got[i], want)
			}
		}
	}
}
