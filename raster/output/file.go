package output

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// state is where an output is in its lifecycle.
type state int

const (
	open state = iota
	committed
	aborted
)

// File is one file written under a temporary name beside its target:
// write to Temp, then Commit moves it into place or Abort removes it. Use a
// File from one goroutine.
type File struct {
	path, tmp string
	overwrite bool
	sidecars  []string
	// companions are suffixes of files that go where the file goes.
	companions []string
	created    []string // parent folders Create made, outermost first
	state      state
}

// Create runs Check, creates the missing parent folders, removes the
// temporaries of path that killed runs left, and reserves a temporary name
// beside path ending in suffix (".tif", ".gpkg", ""). Nothing exists at
// that name yet: the writer creates it.
func Create(path string, overwrite bool, suffix string) (*File, error) {
	if err := Check(path, overwrite); err != nil {
		return nil, err
	}
	created, err := makeParents(path)
	if err != nil {
		return nil, err
	}
	clean := filepath.Clean(path)
	removeStale(clean)
	f := &File{path: path, tmp: tempName(clean, suffix), overwrite: overwrite, created: created}
	// Only a dead process with this pid can have left this name.
	os.RemoveAll(f.tmp)
	return f, nil
}

// Path returns the final path.
func (f *File) Path() string { return f.path }

// Temp returns the temporary path to write to.
func (f *File) Temp() string { return f.tmp }

// Sidecars names files Temp()+suffix that the writer may make beside the
// temporary (GDAL's ".aux.xml", SQLite's "-journal"). Commit and Abort
// remove them.
func (f *File) Sidecars(suffixes ...string) { f.sidecars = append(f.sidecars, suffixes...) }

// Companions names files Temp()+suffix that belong with the file and go
// where it goes (GDAL's ".aux.xml", holding what a format has no place
// for, such as category names). Commit moves each one the writer made to
// Path()+suffix once the file is in place, replacing what is there, and
// removes a Path()+suffix the writer made none for: left from a file the
// new one replaces, or from one gone, it would be read as describing the
// new file. Abort removes them.
func (f *File) Companions(suffixes ...string) {
	f.companions = append(f.companions, suffixes...)
}

// Commit flushes the temporary file to disk, renames it into place and
// flushes the folder. Without overwrite the rename never replaces a target
// that appeared since Create: Commit then fails with an error wrapping
// ErrExists and the temporary is removed. With overwrite the target is
// replaced. Any failure aborts the file. Commit after Commit does nothing.
func (f *File) Commit() error {
	switch f.state {
	case committed:
		return nil
	case aborted:
		return fmt.Errorf("write %s: already aborted", f.path)
	}
	if err := syncPath(f.tmp); err != nil {
		f.Abort()
		return fmt.Errorf("write %s: temporary %s: %w", f.path, filepath.Base(f.tmp), bare(err))
	}
	f.removeSidecars()
	var err error
	if f.overwrite {
		err = bare(os.Rename(f.tmp, f.path))
	} else {
		err = renameNoReplace(f.tmp, f.path, false)
	}
	if errors.Is(err, fs.ErrExist) && !f.overwrite {
		f.Abort()
		return fmt.Errorf("output %s %w", f.path, ErrExists)
	}
	if err != nil {
		f.Abort()
		return fmt.Errorf("write %s: %w", f.path, err)
	}
	f.state = committed
	if err := f.moveCompanions(); err != nil {
		return fmt.Errorf("write %s: %w", f.path, bare(err))
	}
	if err := syncFolders(f.path, f.created); err != nil {
		return fmt.Errorf("write %s: flush folder: %w", f.path, bare(err))
	}
	return nil
}

// Abort removes the temporary, its sidecars and the parent folders Create
// made, if empty. It does nothing after Commit or a first Abort.
func (f *File) Abort() {
	if f.state != open {
		return
	}
	f.state = aborted
	os.Remove(f.tmp)
	f.removeSidecars()
	for _, s := range f.companions {
		os.Remove(f.tmp + s)
	}
	removeCreated(f.created)
}

func (f *File) removeSidecars() {
	for _, s := range f.sidecars {
		os.Remove(f.tmp + s)
	}
}

// moveCompanions moves the companions beside the committed file, flushed
// first, and removes those left there that the writer did not make.
func (f *File) moveCompanions() error {
	for _, s := range f.companions {
		err := syncPath(f.tmp + s)
		if err == nil {
			err = os.Rename(f.tmp+s, f.path+s)
		}
		if errors.Is(err, fs.ErrNotExist) {
			err = os.Remove(f.path + s)
		}
		if err != nil && !errors.Is(err, fs.ErrNotExist) {
			return err
		}
	}
	return nil
}

// WriteFile writes data to path through a File: Create, write, Commit,
// and Abort on any error.
func WriteFile(path string, data []byte, overwrite bool) error {
	f, err := Create(path, overwrite, "")
	if err != nil {
		return err
	}
	defer f.Abort()
	if err := os.WriteFile(f.Temp(), data, 0o666); err != nil {
		return fmt.Errorf("write %s: %w", path, bare(err))
	}
	return f.Commit()
}
