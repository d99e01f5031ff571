package jobkit

import (
	"os"
	"path/filepath"
	"strings"

	"bandfold/raster"
)

// DocPaths writes the paths of a JSON document kept in folder Dir (a
// change folder's summary.json, a timeline's timeline.json, an
// estimate.json beside its survey): every local file it names, input or
// output, relative to Dir, so that the folder and its inputs can be moved
// together, or read on another machine, and the document still leads to
// them. URLs and GDAL's /vsi paths are written as given, and so is an
// argument that names no local file (a driver's connection string). The
// document a command prints with --json is the same document, its paths
// relative to the same folder; Resolve turns them back into paths from the
// working directory, for messages.
type DocPaths struct {
	// Dir is the document's folder, as the program names it (relative
	// to the working directory, or absolute).
	Dir string
}

// Input is an input argument as the document records it: a stack
// ("a.tif,b.tif") path by path, a member of an ItemCollection
// ("items.json#ID") with its file relative and its id kept.
func (d DocPaths) Input(arg string) string {
	parts := SplitStack(arg)
	if len(parts) < 2 {
		return d.input(strings.TrimSpace(arg))
	}
	for i, p := range parts {
		parts[i] = d.input(p)
	}
	return strings.Join(parts, ",")
}

func (d DocPaths) input(p string) string {
	if raster.IsVirtual(p) || raster.IsURL(p) {
		return p
	}
	file := raster.ItemFile(p)
	if fi, err := os.Stat(file); err != nil || fi.IsDir() {
		return p
	}
	return d.rel(file) + strings.TrimPrefix(p, file)
}

// Outputs are output files, named as the program names them (from the
// working directory, or absolute), as the document records them.
func (d DocPaths) Outputs(paths ...string) []string {
	out := make([]string, len(paths))
	for i, p := range paths {
		out[i] = d.rel(p)
	}
	return out
}

// Entries are files of the document's own folder, by name, as the
// document records them.
func (d DocPaths) Entries(names []string) []string {
	out := make([]string, len(names))
	for i, n := range names {
		out[i] = d.rel(filepath.Join(d.Dir, n))
	}
	return out
}

// Resolve is a path the document records, as seen from the working
// directory.
func (d DocPaths) Resolve(p string) string {
	if p == "" || filepath.IsAbs(p) || raster.IsVirtual(p) || raster.IsURL(p) {
		return p
	}
	return filepath.Join(d.Dir, p)
}

// ResolveAll is Resolve of every path of ps.
func (d DocPaths) ResolveAll(ps []string) []string {
	out := make([]string, len(ps))
	for i, p := range ps {
		out[i] = d.Resolve(p)
	}
	return out
}

// rel is p relative to Dir; absolute when no relative path leads there.
func (d DocPaths) rel(p string) string {
	abs, err := filepath.Abs(p)
	if err != nil {
		return p
	}
	dir, err := filepath.Abs(d.Dir)
	if err != nil {
		return abs
	}
	r, err := filepath.Rel(dir, abs)
	if err != nil {
		return abs
	}
	return r
}
