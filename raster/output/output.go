// Package output owns the lifecycle of every file and folder bandfold
// writes. An output is written under a hidden temporary name beside its
// target and, on success, moved into place by one rename that refuses to
// replace what it must not replace; on failure it is removed. A run killed
// half-way leaves only temporaries, which the next run writing the same
// target removes.
//
// Check and CheckFolder refuse, before any work, a target that cannot be
// written; Distinct refuses outputs that would replace an input or each
// other. File (Create, WriteFile) and Folder (CreateFolder) then do the
// writing. A folder is committed with a manifest (ManifestName) listing its
// entries, so a later run can tell its own previous output, which it may
// replace, from a user's folder, which it never touches.
//
// The package knows nothing of GDAL: GDAL writes to File.Temp and names the
// sidecar files it may make with File.Sidecars.
package output

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
)

// Errors callers branch on. They are wrapped with the path they concern.
var (
	// ErrExists: the target exists and overwriting was not asked.
	ErrExists = errors.New("exists (use --overwrite to replace it)")
	// ErrSameFile: an output is the same file as an input or another
	// output, or an output folder holds an input.
	ErrSameFile = errors.New("same file as an input or another output")
	// ErrForeignFolder: an existing folder holds files that are not a
	// previous bandfold output; it is never replaced.
	ErrForeignFolder = errors.New("holds files that are not a previous bandfold output")
	// ErrVirtual: a GDAL virtual path (prefix "/vsi") cannot be written
	// atomically.
	ErrVirtual = errors.New("is a GDAL virtual path, which cannot be written atomically (write to a local path and copy it)")
)

// ManifestName is the file a committed Folder holds, listing its entries.
const ManifestName = "bandfold-output.json"

// manifestFormat marks a manifest as bandfold's.
const manifestFormat = "bandfold-output"

type manifest struct {
	Format  string   `json:"format"`
	Version int      `json:"version"`
	Files   []string `json:"files"`
}

// Check refuses, before any work, a target file that cannot be written: a
// GDAL virtual path, an existing folder, an existing file without overwrite
// (wrapping ErrExists), a parent path that exists but is not a folder. A
// missing parent folder is fine: Create makes it.
func Check(path string, overwrite bool) error {
	if err := checkName(path); err != nil {
		return err
	}
	fi, err := os.Lstat(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("output %s: %w", path, bare(err))
	}
	if fi.IsDir() || isSymlinkToDir(path, fi) {
		return fmt.Errorf("output %s is a folder", path)
	}
	if !overwrite {
		return fmt.Errorf("output %s %w", path, ErrExists)
	}
	return nil
}

// CheckFolder is Check for an output folder. An existing non-folder is
// refused. An existing non-empty folder must be a previous bandfold output
// (its manifest present and nothing in it that the manifest does not list),
// else ErrForeignFolder, even with overwrite; a previous output without
// overwrite is ErrExists. An empty folder is accepted.
func CheckFolder(path string, overwrite bool) error {
	if err := checkName(path); err != nil {
		return err
	}
	fi, err := os.Lstat(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("output %s: %w", path, bare(err))
	}
	switch {
	case fi.Mode()&fs.ModeSymlink != 0:
		// Replacing the folder would replace the link, not what it
		// points to.
		return fmt.Errorf("output %s is a symbolic link (give the folder it points to)", path)
	case !fi.IsDir():
		return fmt.Errorf("output %s is a file, not a folder", path)
	}
	entries, err := os.ReadDir(path)
	if err != nil {
		return fmt.Errorf("output %s: %w", path, bare(err))
	}
	if len(entries) == 0 {
		return nil
	}
	if why := foreign(path, entries); why != "" {
		return fmt.Errorf("output %s %w (%s)", path, ErrForeignFolder, why)
	}
	if !overwrite {
		return fmt.Errorf("output %s %w", path, ErrExists)
	}
	return nil
}

// foreign says why the folder dir with entries is not a previous bandfold
// output, or returns "" when it is one.
func foreign(dir string, entries []fs.DirEntry) string {
	m, why := readManifest(dir)
	if why != "" {
		return why
	}
	var extra []string
	for _, e := range entries {
		if e.Name() != ManifestName && !slices.Contains(m.Files, e.Name()) {
			extra = append(extra, e.Name())
		}
	}
	switch len(extra) {
	case 0:
		return ""
	case 1:
		return fmt.Sprintf("%s is not listed in its %s", extra[0], ManifestName)
	}
	return fmt.Sprintf("%s and %d more are not listed in its %s", extra[0], len(extra)-1, ManifestName)
}

// readManifest reads the manifest of the output folder dir, or says why
// dir holds none of bandfold's.
func readManifest(dir string) (manifest, string) {
	var m manifest
	data, err := os.ReadFile(filepath.Join(dir, ManifestName))
	if err != nil {
		return m, "no " + ManifestName
	}
	if err := json.Unmarshal(data, &m); err != nil || m.Format != manifestFormat {
		return m, ManifestName + " is not bandfold's"
	}
	return m, ""
}

// Listed returns the names the manifest of the committed output folder dir
// lists, and false when dir holds no bandfold manifest.
func Listed(dir string) ([]string, bool) {
	m, why := readManifest(dir)
	return m.Files, why == ""
}

// checkName refuses virtual paths, paths that name no file (".", "/"), and
// paths under an existing non-folder.
func checkName(path string) error {
	if strings.HasPrefix(path, "/vsi") {
		return fmt.Errorf("output %s %w", path, ErrVirtual)
	}
	clean := filepath.Clean(path)
	if base := filepath.Base(clean); base == "." || base == ".." || base == string(filepath.Separator) {
		return fmt.Errorf("output %s: not a file or folder name", path)
	}
	for dir := filepath.Dir(clean); ; dir = filepath.Dir(dir) {
		fi, err := os.Stat(dir)
		switch {
		case err == nil && !fi.IsDir():
			return fmt.Errorf("output %s: %s is not a folder", path, dir)
		case err == nil:
			return nil
		case !errors.Is(err, fs.ErrNotExist) && !errors.Is(err, syscall.ENOTDIR):
			return fmt.Errorf("output %s: folder %s: %w", path, dir, bare(err))
		}
		if filepath.Dir(dir) == dir {
			return nil
		}
	}
}

func isSymlinkToDir(path string, fi fs.FileInfo) bool {
	if fi.Mode()&fs.ModeSymlink == 0 {
		return false
	}
	target, err := os.Stat(path)
	return err == nil && target.IsDir()
}

// Path is a file or folder named for Distinct: Role names it in messages
// ("input", "basis", "output folder").
type Path struct {
	Role, Path string
	Folder     bool
}

// Distinct refuses, wrapping ErrSameFile, any output that is the same file
// as an input or as another output, and any output folder that holds an
// input or another output at any depth (committing the folder would delete
// it). Existing files are compared with os.SameFile, which sees hard and
// symbolic links; paths that do not exist are compared as absolute, cleaned
// paths with the symbolic links of their folder resolved. Empty paths are
// skipped.
func Distinct(inputs, outputs []Path) error {
	ins, outs := resolveAll(inputs), resolveAll(outputs)
	for i, o := range outs {
		for _, in := range ins {
			if err := clash(o, in); err != nil {
				return err
			}
		}
		for _, prev := range outs[:i] {
			if err := clash(o, prev); err != nil {
				return err
			}
			if err := clash(prev, o); err != nil {
				return err
			}
		}
	}
	return nil
}

// resolved is a Path with what identifies it on disk.
type resolved struct {
	Path Path
	key  string      // absolute path, symbolic links of its folder resolved
	fi   fs.FileInfo // nil when it does not exist
}

func resolveAll(ps []Path) []resolved {
	var out []resolved
	for _, p := range ps {
		if p.Path == "" {
			continue
		}
		r := resolved{Path: p, key: key(p.Path)}
		if fi, err := os.Stat(p.Path); err == nil {
			r.fi = fi
			if fi.IsDir() {
				if full, err := filepath.EvalSymlinks(p.Path); err == nil {
					r.key, _ = filepath.Abs(full)
				}
			}
		}
		out = append(out, r)
	}
	return out
}

// clash refuses out when it is other, or when it is a folder holding other.
func clash(out, other resolved) error {
	same := out.key == other.key
	if out.fi != nil && other.fi != nil {
		same = os.SameFile(out.fi, other.fi)
	}
	o, p := out.Path, other.Path
	if same {
		return &sameFileError{fmt.Sprintf("%s %s is the same file as %s %s", o.Role, o.Path, p.Role, p.Path)}
	}
	if o.Folder && strings.HasPrefix(other.key, strings.TrimSuffix(out.key, string(filepath.Separator))+string(filepath.Separator)) {
		return &sameFileError{fmt.Sprintf("%s %s holds %s %s, which replacing the folder would delete", o.Role, o.Path, p.Role, p.Path)}
	}
	return nil
}

// sameFileError is a message that wraps ErrSameFile without repeating it.
type sameFileError struct{ msg string }

func (e *sameFileError) Error() string { return e.msg }
func (e *sameFileError) Unwrap() error { return ErrSameFile }

// key returns path absolute and cleaned, with the symbolic links of its
// nearest existing folder resolved (".." after a link is resolved as the
// system does).
func key(path string) string {
	abs, err := filepath.Abs(path)
	if err != nil {
		return filepath.Clean(path)
	}
	// The folder as written, unresolved, so that "link/../x" means what
	// the system makes of it.
	raw := path
	if !filepath.IsAbs(raw) {
		if wd, err := os.Getwd(); err == nil {
			raw = wd + string(filepath.Separator) + raw
		}
	}
	raw = strings.TrimRight(raw, string(filepath.Separator))
	if i := strings.LastIndexByte(raw, filepath.Separator); i > 0 {
		if name := raw[i+1:]; name != "." && name != ".." {
			if dir, err := filepath.EvalSymlinks(raw[:i]); err == nil {
				return filepath.Join(dir, name)
			}
		}
	}
	// The folder does not exist: resolve its nearest existing ancestor.
	rest := filepath.Base(abs)
	for dir := filepath.Dir(abs); ; dir = filepath.Dir(dir) {
		if r, err := filepath.EvalSymlinks(dir); err == nil {
			return filepath.Join(r, rest)
		}
		if filepath.Dir(dir) == dir {
			return abs
		}
		rest = filepath.Join(filepath.Base(dir), rest)
	}
}

// bare drops the path that os errors repeat, since messages name it already.
func bare(err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	var le *os.LinkError
	if errors.As(err, &le) {
		return le.Err
	}
	return err
}
