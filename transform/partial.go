package transform

import (
	"errors"
	"fmt"
	"math"
	"reflect"
	"slices"
	"time"

	"bandfold/bands"
)

// PartialFormat is the value of the "format" member of a partial file.
const PartialFormat = "bandfold-partial"

// Partial is the un-decomposed band statistics accumulated by one shard of a
// job split over a cluster, stored as a JSON partial file
// ("format": "bandfold-partial", "version": 1). The N shards of a job each
// cover their own tiles of the same inputs; CheckSet verifies that a set of
// partials is one whole job and Combine merges their statistics.
type Partial struct {
	// Format is always PartialFormat; Version is LatestVersion for
	// partials written now, 1 or 2 for older files.
	Format  string `json:"format"`
	Version int    `json:"version"`
	// Tool is the version of the program that wrote the partial.
	Tool string `json:"tool"`
	// Created is when the shard finished.
	Created time.Time `json:"created"`
	// Shard is this shard's number, 0 ≤ Shard < Shards.
	Shard  int `json:"shard"`
	Shards int `json:"shards"`
	// TileSize is the edge length in pixels of the tiles the inputs are cut
	// into, which decides which tiles belong to which shard; 0 stands for
	// the automatic tiling, aligned to the inputs' blocks, which the input
	// fingerprints pin down.
	TileSize int `json:"tile_size"`
	// Stride is the sampling step, as in Basis.
	Stride int `json:"stride"`
	// Mode is the mode the basis is to be fitted in.
	Mode Mode `json:"mode"`
	// Bands and Inputs are as in Basis and must be the same for all shards.
	Bands  []Band        `json:"bands"`
	Inputs []Fingerprint `json:"inputs"`
	// State is the shard's accumulated statistics.
	State bands.State `json:"state"`

	// Version 2 members, absent from version 1 files: the method the basis
	// is to be fitted with, the noise pairs ("horizontal", "vertical" or
	// "both") and the shard's accumulated shift differences
	// (bands.ShiftDifferences), present when Noise is set, and the
	// wavelengths and excluded bands to record in the basis.
	Method        Method       `json:"method,omitempty"`
	Noise         string       `json:"noise,omitempty"`
	NoiseState    *bands.State `json:"noise_state,omitempty"`
	WavelengthsNM []float64    `json:"wavelengths_nm,omitempty"`
	Excluded      []Excluded   `json:"excluded,omitempty"`

	// SourceBands, version 3, is as in Basis.
	SourceBands *SourceBands `json:"source_bands,omitempty"`
}

// ReadPartial reads and checks the partial file at path. Errors name the file
// and wrap ErrMalformed or ErrUnknownVersion as those of ReadBasis do.
func ReadPartial(path string) (*Partial, error) {
	return readFile[Partial]("partial", PartialFormat, path)
}

func parsePartial(data []byte) (*Partial, error) { return parse[Partial](PartialFormat, data) }

// Marshal checks pt and returns the content of its partial file, formatted
// as Basis.Marshal formats a basis.
func (pt *Partial) Marshal() ([]byte, error) { return marshal("partial", pt) }

func (pt *Partial) validate() error {
	switch {
	case pt.Format != PartialFormat:
		return fmt.Errorf("format %q, want %q", pt.Format, PartialFormat)
	case pt.Version < oldestVersion || pt.Version > LatestVersion:
		return fmt.Errorf("%w %d", ErrUnknownVersion, pt.Version)
	case pt.Version == 1 && (pt.Method != "" || pt.Noise != "" || pt.NoiseState != nil || pt.WavelengthsNM != nil || pt.Excluded != nil):
		return errors.New("version 1 with version 2 members")
	case pt.Version < 3 && pt.SourceBands != nil:
		return fmt.Errorf("version %d with source_bands, a version 3 member", pt.Version)
	case (pt.Noise == "") != (pt.NoiseState == nil):
		return errors.New("noise and noise_state must be given together")
	case pt.Method == MNF && pt.NoiseState == nil:
		return errors.New("method mnf without a noise_state")
	case pt.Shards < 1 || pt.Shard < 0 || pt.Shard >= pt.Shards:
		return fmt.Errorf("shard %d of %d", pt.Shard, pt.Shards)
	case pt.TileSize < 0:
		return fmt.Errorf("tile size %d is negative", pt.TileSize)
	case pt.Stride < 1:
		return fmt.Errorf("stride %d is not positive", pt.Stride)
	case !pt.Mode.valid():
		return fmt.Errorf("unknown mode %q", pt.Mode)
	case len(pt.Bands) == 0:
		return errors.New("no bands")
	case len(pt.State.Mean) != len(pt.Bands):
		return fmt.Errorf("state has %d bands, want %d", len(pt.State.Mean), len(pt.Bands))
	}
	if err := checkBands(pt.Bands); err != nil {
		return err
	}
	if pt.SourceBands != nil {
		if err := pt.SourceBands.check(len(pt.Bands)); err != nil {
			return err
		}
	}
	if pt.NoiseState != nil {
		if _, err := bands.ParseShift(pt.Noise); err != nil {
			return err
		}
		if len(pt.NoiseState.Mean) != len(pt.Bands) {
			return fmt.Errorf("noise_state has %d bands, want %d", len(pt.NoiseState.Mean), len(pt.Bands))
		}
		if _, err := bands.FromState(*pt.NoiseState); err != nil {
			return fmt.Errorf("noise_state: %w", err)
		}
	}
	_, err := bands.FromState(pt.State)
	return err
}

// CheckSet verifies that parts, read from the files paths (for messages), are
// one whole job: shards 0..N-1 once each, all with the same N, tile size,
// stride, mode, bands and inputs as the first. Its error lists every foreign,
// duplicated, out-of-range and missing shard, naming the files. CheckSet
// panics if the slices' lengths differ.
func CheckSet(parts []*Partial, paths []string) error {
	if len(parts) != len(paths) {
		panic("transform: CheckSet: len(parts) != len(paths)")
	}
	if len(parts) == 0 {
		return errors.New("no partials")
	}
	ref, refPath := parts[0], paths[0]
	var errs []error
	seen := make(map[int]string)
	for i, pt := range parts {
		if why := foreign(ref, pt); why != "" {
			errs = append(errs, fmt.Errorf("partial %s: shard %d is foreign: %s (%s has %s)", paths[i], pt.Shard, why, refPath, foreign(pt, ref)))
			continue
		}
		if pt.Shard < 0 || pt.Shard >= ref.Shards {
			errs = append(errs, fmt.Errorf("partial %s: shard %d out of range 0..%d", paths[i], pt.Shard, ref.Shards-1))
			continue
		}
		if first, dup := seen[pt.Shard]; dup {
			errs = append(errs, fmt.Errorf("partial %s: shard %d of %d duplicated (also in %s)", paths[i], pt.Shard, ref.Shards, first))
			continue
		}
		seen[pt.Shard] = paths[i]
	}
	for s := range ref.Shards {
		if _, ok := seen[s]; !ok {
			errs = append(errs, fmt.Errorf("shard %d of %d missing", s, ref.Shards))
		}
	}
	return errors.Join(errs...)
}

// foreign describes the first job parameter of pt that differs from ref, or
// returns "".
func foreign(ref, pt *Partial) string {
	switch {
	case pt.Shards != ref.Shards:
		return fmt.Sprintf("%d shards", pt.Shards)
	case pt.TileSize != ref.TileSize:
		return fmt.Sprintf("tile size %d", pt.TileSize)
	case pt.Stride != ref.Stride:
		return fmt.Sprintf("stride %d", pt.Stride)
	case pt.Mode != ref.Mode:
		return fmt.Sprintf("mode %s", pt.Mode)
	case pt.Method != ref.Method || pt.Noise != ref.Noise:
		return fmt.Sprintf("method %q with noise pairs %q", pt.Method, pt.Noise)
	case !slices.EqualFunc(pt.Bands, ref.Bands, sameBand):
		return describeDiff("band", pt.Bands, ref.Bands, sameBand, Band.String)
	case !slices.EqualFunc(pt.Inputs, ref.Inputs, sameInput):
		return describeDiff("input", pt.Inputs, ref.Inputs, sameInput, Fingerprint.String)
	case !reflect.DeepEqual(pt.SourceBands, ref.SourceBands):
		return "source " + pt.SourceBands.String()
	}
	return ""
}

// describeDiff describes the first element of a that differs from b, or the
// length of a if that differs.
func describeDiff[T any](what string, a, b []T, same func(T, T) bool, str func(T) string) string {
	if len(a) != len(b) {
		return fmt.Sprintf("%d %ss", len(a), what)
	}
	for i := range a {
		if !same(a[i], b[i]) {
			return fmt.Sprintf("%s %d = %s", what, i+1, str(a[i]))
		}
	}
	return ""
}

func sameBand(a, b Band) bool {
	if (a.NoData == nil) != (b.NoData == nil) || (a.NoData != nil && !sameValue(*a.NoData, *b.NoData)) {
		return false
	}
	a.NoData, b.NoData = nil, nil
	return a == b
}

func sameInput(a, b Fingerprint) bool {
	return a.Path == b.Path && a.Size == b.Size && a.ModTime.Equal(b.ModTime)
}

// Combine checks parts with CheckSet and merges their statistics in shard
// order, so that the result does not depend on the order of parts.
func Combine(parts []*Partial, paths []string) (*bands.Accumulator, error) {
	if err := CheckSet(parts, paths); err != nil {
		return nil, err
	}
	return combine(parts, paths, func(pt *Partial) bands.State { return pt.State })
}

// CombineNoise merges the shards' shift-difference statistics as Combine
// merges their co-moments; it returns nil when the partials carry none.
// Call it after Combine, which checks the set.
func CombineNoise(parts []*Partial, paths []string) (*bands.Accumulator, error) {
	if len(parts) == 0 || parts[0].NoiseState == nil {
		return nil, nil
	}
	return combine(parts, paths, func(pt *Partial) bands.State { return *pt.NoiseState })
}

func combine(parts []*Partial, paths []string, state func(*Partial) bands.State) (*bands.Accumulator, error) {
	order := make([]int, len(parts))
	for i, pt := range parts {
		order[pt.Shard] = i
	}
	var acc *bands.Accumulator
	for _, i := range order {
		a, err := bands.FromState(state(parts[i]))
		if err != nil {
			return nil, fmt.Errorf("partial %s: %w", paths[i], err)
		}
		if acc == nil {
			acc = a
		} else {
			acc.Merge(a)
		}
	}
	return acc, nil
}

// sameValue reports whether x and y are the same nodata value: equal, or
// both NaN.
func sameValue(x, y float64) bool { return x == y || (math.IsNaN(x) && math.IsNaN(y)) }
