package jobkit

import (
	"bandfold/raster"
	"bandfold/raster/output"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"slices"
	"strconv"
	"strings"
)

// Caution is repeated wherever a change map is reported.
const Caution = "A change map is a screening result: verify mapped changes against imagery or field checks before acting on them; local regulations and licensed practice govern any action taken on it."

// Count writes n with thousands separators: 4,013,117.
func Count(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// Label reads a reference label: change (or 1), no change (or 0), "" for
// none.
func Label(s string) (int, bool) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "change", "1":
		return 0, true
	case "no change", "0":
		return 1, true
	case "":
		return -1, true
	}
	return -1, false
}

func Ptr(v float64) *float64 { return &v }

func Contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}

var Resamplings = []string{"nearest", "bilinear", "cubic", "cubicspline", "lanczos", "average", "mode"}

// UnwrapPath drops the path that os errors repeat, since messages name it
// already.
func UnwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// CommitSummary prints the warnings kept for the end, writes v as the JSON
// file name in the folder and moves the folder into place.
func CommitSummary(env Env, dir *output.Folder, name string, v any, warnings []string) error {
	for _, w := range warnings {
		env.Warn("%s", w)
	}
	js, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("summary of %s: %w", dir.Final(), err)
	}
	if err := output.WriteFile(dir.Path(name), append(js, '\n'), false); err != nil {
		return err
	}
	return dir.Commit()
}

// Document is the head of every JSON document bandfold writes or prints:
// what it is and the version of its layout, so that scripts can check
// both. The documents' JSON Schemas are under docs/schemas/.
type Document struct {
	Format  string `json:"format"`
	Version int    `json:"version"`
}

// Doc returns the head of a document of the given format, version 1.
func Doc(format string) Document { return Document{Format: format, Version: 1} }

// Strings returns s, or an empty list for nil: lists in JSON documents are
// [] when empty, never null.
func Strings(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// OutputFormat is how a job writes its rasters: GeoTIFF or COG
// (--format), and GDAL creation options over bandfold's defaults (--co).
type OutputFormat struct {
	Format          raster.Format
	CreationOptions []string
}

// Check refuses a format or creation options GDAL's driver would not take,
// before any work, and defaults the format to GeoTIFF.
func (f *OutputFormat) Check() error {
	if f.Format == "" {
		f.Format = raster.GTiff
	}
	opts := f.CreationOptions
	if f.Format == raster.COG {
		opts = raster.COGSpelling(opts)
	}
	if err := raster.CheckCreationOptions(f.Format, opts); err != nil {
		return Usagef("--co: %v", err)
	}
	return nil
}

// Spec is s written in this format, the user's creation options after the
// job's own; classes marks a raster of class codes (its COG overviews take
// the nearest value).
func (f OutputFormat) Spec(s raster.Spec, classes bool) raster.Spec {
	s.Format, s.Categorical = f.Format, classes
	s.CreationOptions = append(slices.Clone(s.CreationOptions), f.CreationOptions...)
	return s
}
