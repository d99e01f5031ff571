package series

import (
	"cmp"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"math"
	"os"
	"slices"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// ScanState is what the sample pass gathers, in a form that merges: each
// date's co-moments (exact sums for integer pixels) and the sample's
// candidates with their values on every date. A shard's scan partial holds
// its share; the model file holds the merge of all shards'.
type ScanState struct {
	// Acc holds each date's merged co-moments (the model file), Tiles
	// each sample tile's instead (a shard's partial), merged in tile order
	// as a single run merges them, so that even pixels that are not
	// integers give the same sums bit for bit.
	Acc    []bands.State
	Tiles  []TileAcc
	Sample *change.TileSample
}

// TileAcc is one sample tile's co-moments of every date, with the tile's
// number in the whole image's sample grid.
type TileAcc struct {
	Tile int
	Acc  []bands.State
}

// scanShard returns the shard's tiles of the sample grid ts, numbered
// among themselves, or nil in a single run; the sample pass keeps their
// co-moments tile by tile.
func (r *Run) scanShard(ts []tiles.Tile) []tiles.Tile {
	if r.shard == nil {
		return nil
	}
	out := []tiles.Tile{}
	r.scanAt = r.scanAt[:0]
	for k, t := range ts {
		if r.shard.Has(k) {
			t.Index = len(out)
			out = append(out, t)
			r.scanAt = append(r.scanAt, k)
		}
	}
	return out
}

// keepTile keeps a shard's sample tile's co-moments.
func (r *Run) keepTile(t tiles.Tile, acc []*bands.Accumulator) {
	if r.shard == nil {
		return
	}
	ta := TileAcc{Tile: r.scanAt[t.Index]}
	for _, a := range acc {
		ta.Acc = append(ta.Acc, a.State())
	}
	r.tileAcc = append(r.tileAcc, ta)
}

// UseShard restricts the sample and map passes to the shard's tiles: tile
// k of the map grid is shard k mod N's, as jobkit.NewScan deals them, so
// that the shards of a job cover every tile once.
func (r *Run) UseShard(sh jobkit.Shard) {
	r.shard, r.only = &sh, nil
	for k, t := range r.tiles {
		if sh.Has(k) {
			t.Index = len(r.only)
			r.only = append(r.only, t)
		}
	}
	if r.only == nil {
		r.only = []tiles.Tile{} // a shard with no tile passes over nothing
	}
}

// ShardOf returns the shard of N that maps tile k, and k's place among
// that shard's tiles.
func ShardOf(k, n int) (shard, place int) { return k % n, k / n }

// MapTiles are the tiles of the whole map, in order.
func (r *Run) MapTiles() []tiles.Tile { return r.tiles }

// ScanState returns the sample pass's statistics (after Sample).
func (r *Run) ScanState() ScanState {
	s := ScanState{Sample: r.stats.sample.Export()}
	if r.shard != nil {
		s.Tiles = r.tileAcc
		return s
	}
	for _, a := range r.stats.acc {
		s.Acc = append(s.Acc, a.State())
	}
	return s
}

// MergeScans takes the place of Sample: it merges the scan states of all
// shards, in shard order, into the statistics a single pass over every
// tile gathers (the same bit for bit for integer pixels), and refuses a
// pair of dates with no pixel valid on both, as Sample does; what names
// the states' files in errors.
func (r *Run) MergeScans(ctx context.Context, parts []ScanState, what []string) error {
	p, D := r.Scenes[0].Len(), len(r.Scenes)
	r.sampled = r.samplePairs()
	g := r.Scenes[0].Grid
	total := seriesStats{sample: change.NewPairSample(r.C.Sample, p, D, r.sampled, math.MaxUint64, int64(g.Width)*int64(g.Height))}
	var all []TileAcc
	for i, part := range parts {
		if part.Sample == nil || len(part.Sample.Both) != len(r.sampled) ||
			len(part.Sample.Valid) != len(part.Sample.Cands)*D || len(part.Sample.Vals) != len(part.Sample.Cands)*D*p {
			return fmt.Errorf("%s: its sample is not of %d dates of %d bands with %d pairs sampled", what[i], D, p, len(r.sampled))
		}
		total.sample.Add(part.Sample)
		if part.Acc != nil {
			all = append(all, TileAcc{Tile: -1, Acc: part.Acc})
		}
		all = append(all, part.Tiles...)
	}
	slices.SortStableFunc(all, func(a, b TileAcc) int { return cmp.Compare(a.Tile, b.Tile) })
	var err error
	if total.acc, err = r.mergeTiles(all, what[0]); err != nil {
		return err
	}
	if !total.sample.Complete() {
		return fmt.Errorf("%s: the merged sample is incomplete (a shard's sample came short)", what[0])
	}
	return r.finishStats(ctx, total)
}

// mergeTiles merges the tiles' co-moments in order into each date's, as
// Sample does, refusing a tile twice or one of another grid.
func (r *Run) mergeTiles(all []TileAcc, what string) ([]*bands.Accumulator, error) {
	p, D := r.Scenes[0].Len(), len(r.Scenes)
	acc := make([]*bands.Accumulator, D)
	for d := range acc {
		acc[d] = bands.NewExactAccumulator(p)
	}
	for i, ta := range all {
		if i > 0 && ta.Tile == all[i-1].Tile {
			return nil, fmt.Errorf("%s: sample tile %d is in two partials", what, ta.Tile)
		}
		if len(ta.Acc) != D {
			return nil, fmt.Errorf("%s: statistics of %d dates, want %d", what, len(ta.Acc), D)
		}
		for d, st := range ta.Acc {
			a, err := bands.FromState(st)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", what, err)
			}
			if ta.Tile < 0 {
				acc[d] = a // the model file's merged statistics, as they are
			} else {
				acc[d].Merge(a)
			}
		}
	}
	return acc, nil
}

// ModelID identifies a model file by the SHA-256 of its bytes: the map
// pieces record it, so that finish joins only pieces of one fit.
func ModelID(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("read %s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}
