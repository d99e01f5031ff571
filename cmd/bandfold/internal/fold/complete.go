package fold

import (
	"context"
	"fmt"
	"math"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/tiles"
)

// valueSum is a checksum of the values stored in a raster that does not
// depend on the order they are summed in, so that the workers of a fold
// can each sum their tiles and a later read can take any tiles: the sum,
// wrapping at 2⁶⁴, over every stored value of mix(position, its float64
// bits), position counting values pixel-major from the top left ((row ×
// width + column) × bands + band), every NaN taken as one and −0 as 0. mix is
// splitmix64's finaliser (Steele, Lea and Flood, "Fast splittable
// pseudorandom number generators", OOPSLA 2014), so a changed, moved or
// missing value changes the sum but by chance (about 2⁻⁶⁴).
type valueSum uint64

// mix64 is splitmix64's finaliser.
func mix64(z uint64) uint64 {
	z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
	z = (z ^ z>>27) * 0x94d049bb133111eb
	return z ^ z>>31
}

// addRun adds the values vals stored at consecutive positions from start.
func addRun[T float32 | float64](s *valueSum, start int, vals []T) {
	for i, v := range vals {
		x := float64(v)
		var bits uint64 // -0, which integer types store as 0, is taken as 0
		switch {
		case x != x:
			bits = math.Float64bits(math.NaN())
		case x != 0:
			bits = math.Float64bits(x)
		}
		*s += valueSum(mix64(bits ^ mix64(uint64(start+i)+0x9e3779b97f4a7c15)))
	}
}

// addTile adds tile t of a width-pixel-wide raster of k bands from vals,
// its values pixel-major.
func addTile[T float32 | float64](s *valueSum, t tiles.Tile, width, k int, vals []T) {
	n := t.W * k
	for r := range t.H {
		addRun(s, ((t.Y+r)*width+t.X)*k, vals[r*n:(r+1)*n])
	}
}

// String writes the sum as 16 hex digits, as the completion record holds it.
func (s valueSum) String() string { return fmt.Sprintf("%016x", uint64(s)) }

// errUnreadable is readValueSum's failure, in the user's words: GDAL's own
// text (TIFFFillTile, byte counts) says nothing to them.
type errUnreadable string

func (e errUnreadable) Error() string { return string(e) }

// readValueSum reads every value stored in the raster at path, as stored
// (no scale, offset or nodata applied), and returns their valueSum. A file
// that cannot be opened or read whole (cut short, or corrupt) gives an
// errUnreadable saying where the read failed.
func readValueSum(ctx context.Context, path string) (valueSum, error) {
	s, err := raster.Open([]string{path})
	if err != nil {
		return 0, errUnreadable("it cannot be opened")
	}
	defer s.Close()
	// The values as stored: the reader applies what the bands declare.
	for i := range s.Bands {
		s.Bands[i].Scale, s.Bands[i].Offset, s.Bands[i].NoData = 1, 0, nil
	}
	r, err := s.NewReader()
	if err != nil {
		return 0, errUnreadable("it cannot be opened")
	}
	defer r.Close()
	k := s.Len()
	g := jobkit.GridFor(s, 0)
	buf, valid := make([]float64, g.TileW*g.TileH*k), make([]bool, g.TileW*g.TileH)
	var sum valueSum
	for t := range g.Tiles() {
		if err := ctx.Err(); err != nil {
			return 0, err
		}
		if _, err := r.Read(t, buf, valid); err != nil {
			return 0, errUnreadable(fmt.Sprintf("its values from column %d, row %d on cannot be read (the file is cut short or corrupt)", t.X, t.Y))
		}
		addTile(&sum, t, s.Width, k, buf[:t.Pixels()*k])
	}
	return sum, nil
}

// valuesKey introduces the checksum in a completion record;
// uncheckedValues stands for it when lossy creation options store other
// values than those written, so that only a whole read is checked.
const (
	valuesKey       = " values="
	uncheckedValues = "lossy"
)

// checksum is what the completion record holds of the values written,
// whose valueSum is sum.
func (f *folding) checksum(sum valueSum) string {
	if lossyCreation(f.format, f.o.CreationOptions) != "" {
		return uncheckedValues
	}
	return sum.String()
}

// checkComplete decides what a batch rerun does with an output that
// exists, from the completion record it holds (md, its metadata) and the
// record this run would write (want): skip it when its record is this
// run's and the values it stores sum to the checksum recorded; write it
// again when the record is this run's but the file is damaged (cut short,
// or values that no longer sum to it), saying why in damaged; refuse it
// when it was written with other inputs or options.
func checkComplete(ctx context.Context, out string, md map[string]string, want string) (skip bool, damaged string, err error) {
	opts, sum, ok := strings.Cut(md[completeKey], valuesKey)
	if !ok || opts != want {
		return false, "", fmt.Errorf("output %s exists but was written with other inputs or options (use --overwrite to replace it)", out)
	}
	got, err := readValueSum(ctx, out)
	switch {
	case jobkit.Canceled(err):
		return false, "", err
	case err != nil:
		return false, err.Error(), nil
	case sum != uncheckedValues && got.String() != sum:
		return false, "its values are not those written (checksum " + got.String() + ", recorded " + sum + ")", nil
	}
	return true, "", nil
}
