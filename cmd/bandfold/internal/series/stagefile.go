package series

import (
	"bufio"
	"encoding/gob"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster/output"
	"bandfold/transform"
)

// A staged run (--stage scan, fit, map, finish) keeps its files in a work
// area beside the output folder: the scan stage's partials, the fit
// stage's model and the map stage's pieces, each a stage file: a gob
// stream of a StageHeader and then the stage's body (one value, or tile
// records). The header records what every later stage checks: the
// command, its options, the inputs' fingerprints, the shard and, for a
// piece, the model it was mapped with.

// StageFormat is the Format of every stage file's header, StageVersion
// its Version: 2 since the map pieces hold their values as bytes.
const (
	StageFormat  = "bandfold-stage"
	StageVersion = 2
)

// The kinds of stage file.
const (
	KindScan  = "scan"
	KindModel = "model"
	KindMap   = "map"
)

// StageHeader opens every stage file.
type StageHeader struct {
	Format  string
	Version int
	Kind    string
	Tool    string
	Command string
	Shard   jobkit.Shard
	// Options are the run's options as JSON (without the stage, the shard
	// and --overwrite), Inputs the fingerprints of the files read.
	Options string
	Inputs  []transform.Fingerprint
	// Model is the model file's ModelID (map pieces only).
	Model string
}

// WorkArea is the folder of a staged run's files: beside the output
// folder, named after it.
func WorkArea(out string) string { return filepath.Clean(out) + ".stages" }

// StagePath is the file of a shard of a kind in the work area
// ("scan-0-of-3.gob"; the model is "model.gob").
func StagePath(out, kind string, sh jobkit.Shard) string {
	if kind == KindModel {
		return filepath.Join(WorkArea(out), "model.gob")
	}
	sh = sh.OrWhole()
	return filepath.Join(WorkArea(out), fmt.Sprintf("%s-%d-of-%d.gob", kind, sh.I, sh.N))
}

// StageWriter writes a stage file under a temporary name: the header at
// once, then records; Commit moves it into place.
type StageWriter struct {
	f   *output.File
	fh  *os.File
	buf *bufio.Writer
	enc *gob.Encoder
}

// CreateStage starts the stage file path with its header.
func CreateStage(path string, h StageHeader, overwrite bool) (*StageWriter, error) {
	f, err := output.Create(path, overwrite, ".gob")
	if err != nil {
		return nil, err
	}
	fh, err := os.Create(f.Temp())
	if err != nil {
		f.Abort()
		return nil, fmt.Errorf("write %s: %w", path, err)
	}
	w := &StageWriter{f: f, fh: fh, buf: bufio.NewWriterSize(fh, 1<<20)}
	w.enc = gob.NewEncoder(w.buf)
	h.Format, h.Version = StageFormat, StageVersion
	if err := w.Add(h); err != nil {
		w.Abort()
		return nil, err
	}
	return w, nil
}

// Add writes one more value.
func (w *StageWriter) Add(v any) error {
	if err := w.enc.Encode(v); err != nil {
		return fmt.Errorf("write %s: %w", w.f.Path(), err)
	}
	return nil
}

// Commit flushes and syncs the file and moves it into place.
func (w *StageWriter) Commit() error {
	err := w.buf.Flush()
	if err == nil {
		err = w.fh.Sync()
	}
	if cerr := w.fh.Close(); err == nil {
		err = cerr
	}
	w.fh = nil
	if err != nil {
		return fmt.Errorf("write %s: %w", w.f.Path(), err)
	}
	return w.f.Commit()
}

// Abort removes what was written (a no-op after Commit).
func (w *StageWriter) Abort() {
	if w.fh != nil {
		w.fh.Close()
		w.fh = nil
	}
	w.f.Abort()
}

// WriteStage writes a stage file of one body value.
func WriteStage(path string, h StageHeader, body any, overwrite bool) error {
	w, err := CreateStage(path, h, overwrite)
	if err != nil {
		return err
	}
	defer w.Abort()
	if err := w.Add(body); err != nil {
		return err
	}
	return w.Commit()
}

// StageReader reads a stage file: its header, then records.
type StageReader struct {
	Path   string
	Header StageHeader
	fh     *os.File
	dec    *gob.Decoder
}

// OpenStage opens the stage file path of kind and reads its header.
func OpenStage(path, kind string) (*StageReader, error) {
	fh, err := os.Open(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("%s: %w", path, fs.ErrNotExist)
	}
	if err != nil {
		return nil, err
	}
	r := &StageReader{Path: path, fh: fh, dec: gob.NewDecoder(bufio.NewReaderSize(fh, 1<<20))}
	if err := r.dec.Decode(&r.Header); err != nil || r.Header.Format != StageFormat {
		fh.Close()
		return nil, fmt.Errorf("%s is not a bandfold stage file", path)
	}
	if r.Header.Version != StageVersion || r.Header.Kind != kind {
		fh.Close()
		return nil, fmt.Errorf("%s is a %s file of version %d, want a %s file of version %d: run its stage again with this bandfold", path, r.Header.Kind, r.Header.Version, kind, StageVersion)
	}
	return r, nil
}

// Next reads the next record into v.
func (r *StageReader) Next(v any) error {
	if err := r.dec.Decode(v); err != nil {
		if errors.Is(err, io.EOF) {
			err = io.ErrUnexpectedEOF
		}
		return fmt.Errorf("read %s: %w", r.Path, err)
	}
	return nil
}

func (r *StageReader) Close() error { return r.fh.Close() }

// ReadStage reads a stage file of one body value into body.
func ReadStage(path, kind string, body any) (StageHeader, error) {
	r, err := OpenStage(path, kind)
	if err != nil {
		return StageHeader{}, err
	}
	defer r.Close()
	return r.Header, r.Next(body)
}

// Check refuses a stage file written by another command, with other
// options or from other inputs than want (this run's): one line naming
// the file and the first difference.
func (h StageHeader) Check(path string, want StageHeader) error {
	if h.Command != want.Command {
		return jobkit.Usagef("%s was written by %s, not %s", path, h.Command, want.Command)
	}
	if h.Options != want.Options {
		return jobkit.Usagef("%s was written with other options (%s): run every stage with the same options", path, optionsDiff(h.Options, want.Options))
	}
	if !slices.EqualFunc(h.Inputs, want.Inputs, func(a, b transform.Fingerprint) bool {
		return a.Path == b.Path && a.Size == b.Size && a.ModTime.Equal(b.ModTime)
	}) {
		return fmt.Errorf("%s was written from other inputs (%s) than this run's (%s): another scene, or the files changed since", path, fingerprints(h.Inputs), fingerprints(want.Inputs))
	}
	return nil
}

func fingerprints(fs []transform.Fingerprint) string {
	var out string
	for i, f := range fs {
		if i > 0 {
			out += ", "
		}
		out += f.String()
	}
	return out
}

// optionsDiff names the first option whose value differs between two
// options records.
func optionsDiff(theirs, ours string) string {
	var a, b map[string]json.RawMessage
	if json.Unmarshal([]byte(theirs), &a) != nil || json.Unmarshal([]byte(ours), &b) != nil {
		return "their values differ"
	}
	keys := make([]string, 0, len(a)+len(b))
	for k := range a {
		keys = append(keys, k)
	}
	for k := range b {
		if _, ok := a[k]; !ok {
			keys = append(keys, k)
		}
	}
	sort.Strings(keys)
	for _, k := range keys {
		if string(a[k]) != string(b[k]) {
			return fmt.Sprintf("%s %s there, %s here", k, orNone(a[k]), orNone(b[k]))
		}
	}
	return "the same values written differently"
}

func orNone(v json.RawMessage) string {
	if v == nil {
		return "none"
	}
	return string(v)
}

// StageSet lists the stage files of a kind in the work area and opens
// them (shard order), refusing an empty, incomplete or mixed set, a shard
// twice, and files of other options or inputs than want. The caller closes
// the readers.
func StageSet(out, kind string, want StageHeader) (_ []*StageReader, err error) {
	paths, _ := filepath.Glob(filepath.Join(WorkArea(out), kind+"-*-of-*.gob"))
	if len(paths) == 0 {
		return nil, jobkit.Usagef("%s holds no %s files: run --stage %s first", WorkArea(out), kind, kind)
	}
	var rs []*StageReader
	defer func() {
		if err != nil {
			for _, r := range rs {
				r.Close()
			}
		}
	}()
	shards := make([]jobkit.Shard, len(paths))
	for i, p := range paths {
		r, err := OpenStage(p, kind)
		if err != nil {
			return nil, err
		}
		rs = append(rs, r)
		if err := r.Header.Check(p, want); err != nil {
			return nil, err
		}
		shards[i] = r.Header.Shard
	}
	if err := jobkit.CheckShards(shards, paths); err != nil {
		return nil, fmt.Errorf("%s files in %s: %w", kind, WorkArea(out), err)
	}
	slices.SortFunc(rs, func(a, b *StageReader) int { return a.Header.Shard.I - b.Header.Shard.I })
	return rs, nil
}
