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

	"golang.org/x/sys/unix"
)

// Folder is an output folder written under a temporary name beside its
// target: write files at Path(name), then Commit moves the folder into
// place whole or Abort removes it. Use a Folder from one goroutine.
type Folder struct {
	path, tmp string
	overwrite bool
	created   []string
	state     state
}

// CreateFolder runs CheckFolder, creates the missing parent folders,
// removes the temporaries of path that killed runs left, and makes the
// temporary folder.
func CreateFolder(path string, overwrite bool) (*Folder, error) {
	if err := CheckFolder(path, overwrite); err != nil {
		return nil, err
	}
	created, err := makeParents(path)
	if err != nil {
		return nil, err
	}
	clean := filepath.Clean(path)
	removeStale(clean)
	d := &Folder{path: clean, tmp: tempName(clean, ""), overwrite: overwrite, created: created}
	os.RemoveAll(d.tmp) // only a dead process with this pid can have left it
	if err := os.Mkdir(d.tmp, 0o777); err != nil {
		removeCreated(created)
		return nil, fmt.Errorf("output %s: %w", path, bare(err))
	}
	return d, nil
}

// Path returns the path of name inside the temporary folder.
func (d *Folder) Path(name string) string { return filepath.Join(d.tmp, name) }

// Final returns the final folder path.
func (d *Folder) Final() string { return d.path }

// Commit writes the manifest (ManifestName, listing every entry of the
// folder), flushes the files and the folder to disk, and moves the folder
// into place:
//
//   - a target that does not exist is created by a rename that never
//     replaces one that appears meanwhile: of two runs committing the same
//     new folder, one succeeds and the other fails with ErrExists;
//   - an existing empty folder, without overwrite, is removed only while
//     still empty, then the same rename: again one run succeeds;
//   - an existing previous output, with overwrite (checked again now with
//     CheckFolder), or an empty folder is swapped with the new folder in one
//     step (renameat2 RENAME_EXCHANGE) and then removed. Where the system
//     cannot swap, the old one is renamed aside, the new one renamed in and
//     the old one removed; if the second rename fails the old one is put
//     back.
//
// A failure at any step leaves either the old or the new output whole at
// the target, and aborts the folder. Commit after Commit does nothing.
func (d *Folder) Commit() error {
	switch d.state {
	case committed:
		return nil
	case aborted:
		return fmt.Errorf("write %s: already aborted", d.path)
	}
	if err := d.writeManifest(); err != nil {
		d.Abort()
		return fmt.Errorf("write %s: %w", d.path, bare(err))
	}
	if err := syncTree(d.tmp); err != nil {
		d.Abort()
		return fmt.Errorf("write %s: flush: %w", d.path, err)
	}
	if err := d.move(); err != nil {
		d.Abort()
		return err
	}
	d.state = committed
	if err := syncFolders(d.path, d.created); err != nil {
		return fmt.Errorf("write %s: flush folder: %w", d.path, bare(err))
	}
	return nil
}

// Abort removes the temporary folder and the parent folders CreateFolder
// made, if empty. It does nothing after Commit or a first Abort.
func (d *Folder) Abort() {
	if d.state != open {
		return
	}
	d.state = aborted
	os.RemoveAll(d.tmp)
	removeCreated(d.created)
}

func (d *Folder) writeManifest() error {
	entries, err := os.ReadDir(d.tmp)
	if err != nil {
		return err
	}
	m := manifest{Format: manifestFormat, Version: 1, Files: []string{ManifestName}}
	for _, e := range entries {
		if e.Name() != ManifestName {
			m.Files = append(m.Files, e.Name())
		}
	}
	slices.Sort(m.Files)
	data, err := json.Marshal(m)
	if err != nil {
		return err
	}
	return os.WriteFile(d.Path(ManifestName), append(data, '\n'), 0o666)
}

// syncTree flushes every file and folder under root.
func syncTree(root string) error {
	return filepath.WalkDir(root, func(path string, e fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if e.Type().IsRegular() || e.IsDir() {
			if err := syncPath(path); err != nil {
				rel, _ := filepath.Rel(root, path)
				return fmt.Errorf("%s: %w", rel, bare(err))
			}
		}
		return nil
	})
}

// move puts the temporary folder at the target.
func (d *Folder) move() error {
	if _, err := os.Lstat(d.path); errors.Is(err, fs.ErrNotExist) {
		return d.moveNew()
	}
	if err := CheckFolder(d.path, d.overwrite); err != nil {
		return err
	}
	if !d.overwrite {
		// An empty folder (CheckFolder refused anything else): rmdir
		// fails unless it is still empty, so a run that committed into
		// it meanwhile is never replaced.
		err := os.Remove(d.path)
		if errors.Is(err, unix.ENOTEMPTY) || errors.Is(err, unix.EEXIST) {
			return fmt.Errorf("output %s %w", d.path, ErrExists)
		}
		if err != nil && !errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("write %s: %w", d.path, bare(err))
		}
		return d.moveNew()
	}
	err := renameat2(unix.AT_FDCWD, d.tmp, unix.AT_FDCWD, d.path, unix.RENAME_EXCHANGE)
	switch {
	case err == nil:
		// The old output now has the temporary name.
		os.RemoveAll(d.tmp)
		return nil
	case errors.Is(err, unix.ENOENT):
		return d.moveNew() // removed meanwhile
	case unsupported(err):
		return d.swapAside()
	}
	return fmt.Errorf("write %s: %w", d.path, err)
}

// moveNew renames the temporary folder to a target that does not exist.
func (d *Folder) moveNew() error {
	err := renameNoReplace(d.tmp, d.path, true)
	if errors.Is(err, fs.ErrExist) {
		return fmt.Errorf("output %s %w", d.path, ErrExists)
	}
	if err != nil {
		return fmt.Errorf("write %s: %w", d.path, err)
	}
	return nil
}

// failStep, when set by a test, runs before each step of swapAside ("aside",
// "in", "remove") and fails the step by returning an error.
var failStep func(step string) error

func step(name string, do func() error) error {
	if failStep != nil {
		if err := failStep(name); err != nil {
			return err
		}
	}
	return do()
}

// swapAside replaces the old output without renameat2: the old one is
// renamed aside (its own temporary name, so that a killed run leaves it to
// the next run's cleanup), the new one renamed in, and the old one removed.
// If the new one cannot be renamed in, the old one is put back.
func (d *Folder) swapAside() error {
	aside := tempName(d.path, "")
	err := step("aside", func() error { return os.Rename(d.path, aside) })
	if errors.Is(err, fs.ErrNotExist) {
		return d.moveNew()
	}
	if err != nil {
		return fmt.Errorf("write %s: move the previous output aside: %w", d.path, bare(err))
	}
	err = step("in", func() error { return renameNoReplace(d.tmp, d.path, true) })
	if err != nil {
		if rerr := os.Rename(aside, d.path); rerr != nil {
			return fmt.Errorf("write %s: %v, and the previous output could not be put back: it is whole at %s", d.path, bare(err), aside)
		}
		return fmt.Errorf("write %s: %w", d.path, bare(err))
	}
	// Should the removal fail, the old output is a stale temporary that a
	// later run removes; the new one is in place.
	step("remove", func() error { return os.RemoveAll(aside) })
	return nil
}

// CheckReplace refuses, before any work, what Replace would refuse: a dir
// that is not a committed output folder (no bandfold manifest, wrapping
// ErrForeignFolder), a name that is not a plain file name of it, and a file
// of that name which the manifest does not list (someone else's). Other
// files the manifest does not list are no obstacle: Replace leaves them
// alone (a survey drawn into a change folder sits beside the report that
// its estimate updates).
func CheckReplace(dir, name string) error {
	if err := checkName(dir); err != nil {
		return err
	}
	if fi, err := os.Stat(dir); err != nil {
		return fmt.Errorf("output %s: %w", dir, bare(err))
	} else if !fi.IsDir() {
		return fmt.Errorf("output %s is a file, not a folder", dir)
	}
	if filepath.Base(name) != name || name == ManifestName || name == "." || name == ".." {
		return fmt.Errorf("output %s: %q is not a file name of the folder", dir, name)
	}
	m, why := readManifest(dir)
	if why != "" {
		return fmt.Errorf("output %s %w (%s)", dir, ErrForeignFolder, why)
	}
	if _, err := os.Lstat(filepath.Join(dir, name)); err == nil && !slices.Contains(m.Files, name) {
		return fmt.Errorf("output %s: its %s is not listed in its %s, so it is not bandfold's to replace", dir, name, ManifestName)
	}
	return nil
}

// Replace writes data as the file name inside the committed output folder
// dir (see CheckReplace), replacing the file if present: the data goes to
// a temporary name inside dir, is flushed, the manifest gains name
// (rewritten the same way) if it lacks it, and one rename puts the file in
// place, so a failure leaves the old file or the new one whole and the
// folder recognisable as bandfold's.
func Replace(dir, name string, data []byte) error {
	if err := CheckReplace(dir, name); err != nil {
		return err
	}
	target := filepath.Join(dir, name)
	if err := writeSynced(target, data); err != nil {
		return fmt.Errorf("write %s: %w", target, err)
	}
	return syncPath(dir)
}

// writeSynced writes data to a temporary beside path, flushes it, lists
// path in its folder's manifest and renames it into place.
func writeSynced(path string, data []byte) error {
	dir, name := filepath.Dir(path), filepath.Base(path)
	tmp := tempName(path, "")
	defer os.Remove(tmp)
	if err := os.WriteFile(tmp, data, 0o666); err != nil {
		return bare(err)
	}
	if err := syncPath(tmp); err != nil {
		return bare(err)
	}
	raw, err := os.ReadFile(filepath.Join(dir, ManifestName))
	if err != nil {
		return bare(err)
	}
	var m manifest
	if err := json.Unmarshal(raw, &m); err != nil {
		return fmt.Errorf("%s: %w", ManifestName, err)
	}
	if !slices.Contains(m.Files, name) {
		m.Files = append(m.Files, name)
		slices.Sort(m.Files)
		js, err := json.Marshal(m)
		if err != nil {
			return err
		}
		mtmp := tempName(filepath.Join(dir, ManifestName), "")
		defer os.Remove(mtmp)
		if err := os.WriteFile(mtmp, append(js, '\n'), 0o666); err != nil {
			return bare(err)
		}
		if err := syncPath(mtmp); err != nil {
			return bare(err)
		}
		if err := os.Rename(mtmp, filepath.Join(dir, ManifestName)); err != nil {
			return bare(err)
		}
	}
	return bare(os.Rename(tmp, path))
}

// FinalNames returns err with the temporary folder's path in its message
// replaced by the folder's final path, which is the one the user named;
// errors.Is and errors.As still see err. A nil Folder returns err.
func (d *Folder) FinalNames(err error) error {
	if d == nil || err == nil || !strings.Contains(err.Error(), d.tmp) {
		return err
	}
	return &renamedError{strings.ReplaceAll(err.Error(), d.tmp, d.path), err}
}

// renamedError is an error with a rewritten message.
type renamedError struct {
	msg string
	err error
}

func (e *renamedError) Error() string { return e.msg }
func (e *renamedError) Unwrap() error { return e.err }
