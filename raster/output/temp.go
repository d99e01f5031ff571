package output

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"sync"
	"sync/atomic"
	"syscall"
	"unicode/utf8"

	"golang.org/x/sys/unix"
)

// Temporary names, one scheme for files and folders: hidden, beside the
// target, ".BASE.HOST.PID.SEQ.tmp" + suffix. HOST and PID tell a later run
// whether the writer is gone; SEQ tells apart the outputs of one process.
var (
	// newScheme matches what follows ".BASE." in a temporary name.
	newScheme = regexp.MustCompile(`^([A-Za-z0-9-]+)\.([0-9]+)\.[0-9]+\.tmp`)
	// oldScheme is what earlier releases wrote (".BASE.PID.tmp*"), with
	// no host.
	oldScheme = regexp.MustCompile(`^([0-9]+)\.tmp`)

	seq      atomic.Uint64
	hostName = sync.OnceValue(func() string { return shortHost(os.Hostname()) })
)

// shortHost returns the host name up to its first dot, with characters
// outside [A-Za-z0-9-] replaced by '-'.
func shortHost(name string, err error) string {
	if err != nil || name == "" {
		return "localhost"
	}
	b := []byte(name)
	for i, c := range b {
		if c == '.' {
			b = b[:i]
			break
		}
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-') {
			b[i] = '-'
		}
	}
	if len(b) == 0 {
		return "localhost"
	}
	return string(b)
}

// maxTempBase bounds the part of a temporary name taken from its target's
// name. A file name may have 255 bytes; a target's name of up to that
// length is legal, so a temporary repeating it whole, with the host (up to
// 63 bytes), pid, sequence number, suffix and a writer's sidecar suffix
// (".aux.xml"), would not be. Past this length the temporary keeps the
// name's first bytes and a hash of the whole name, which still tells the
// targets apart; the user's own name is never shortened.
const maxTempBase = 100

// tempBase is the part of the temporaries of target name base that names
// the target: base itself, or when longer than maxTempBase its first bytes
// (whole UTF-8 characters), "~" and 8 hex digits of its SHA-256.
func tempBase(base string) string {
	if len(base) <= maxTempBase {
		return base
	}
	sum := sha256.Sum256([]byte(base))
	cut := maxTempBase - 9
	for cut > 0 && !utf8.RuneStart(base[cut]) {
		cut--
	}
	return base[:cut] + "~" + hex.EncodeToString(sum[:4])
}

// tempName returns a fresh temporary name beside path (cleaned) ending in
// suffix.
func tempName(path, suffix string) string {
	dir, base := filepath.Split(path)
	return filepath.Join(dir, fmt.Sprintf(".%s.%s.%d.%d.tmp%s", tempBase(base), hostName(), os.Getpid(), seq.Add(1), suffix))
}

// owner parses name as a temporary of base: the writer's host ("" for the
// old scheme, which has none) and pid.
func owner(name, base string) (host string, pid int, ok bool) {
	prefix := "." + tempBase(base) + "."
	if len(name) <= len(prefix) || name[:len(prefix)] != prefix {
		return "", 0, false
	}
	rest := name[len(prefix):]
	if m := newScheme.FindStringSubmatch(rest); m != nil {
		pid, err := strconv.Atoi(m[2])
		return m[1], pid, err == nil
	}
	if m := oldScheme.FindStringSubmatch(rest); m != nil {
		pid, err := strconv.Atoi(m[1])
		return "", pid, err == nil
	}
	return "", 0, false
}

// removeStale removes the temporaries of path (cleaned), files or folders,
// that a killed run left: those written on this host (or, old scheme, by a
// release that did not record the host) by a process that is gone. Another
// host's temporaries are never touched (its process may be alive on a file
// system shared under Slurm), nor this process's own.
func removeStale(path string) {
	dir, base := filepath.Split(path)
	entries, err := os.ReadDir(filepath.Join(dir, "."))
	if err != nil {
		return
	}
	for _, e := range entries {
		host, pid, ok := owner(e.Name(), base)
		if !ok || pid <= 0 || pid == os.Getpid() || host != "" && host != hostName() {
			continue
		}
		if syscall.Kill(pid, 0) == syscall.ESRCH {
			os.RemoveAll(filepath.Join(dir, e.Name()))
		}
	}
}

// makeParents creates the missing folders above path and returns them,
// outermost first.
func makeParents(path string) ([]string, error) {
	var missing []string
	for dir := filepath.Dir(filepath.Clean(path)); ; dir = filepath.Dir(dir) {
		if _, err := os.Lstat(dir); err == nil || filepath.Dir(dir) == dir {
			break
		}
		missing = append(missing, dir)
	}
	var created []string
	for i := len(missing) - 1; i >= 0; i-- {
		err := os.Mkdir(missing[i], 0o777)
		if errors.Is(err, fs.ErrExist) {
			continue // made meanwhile by someone else: not ours to remove
		}
		if err != nil {
			removeCreated(created)
			return nil, fmt.Errorf("output %s: create folder %s: %w", path, missing[i], bare(err))
		}
		created = append(created, missing[i])
	}
	return created, nil
}

// removeCreated removes the folders makeParents created, innermost first,
// as long as they are empty.
func removeCreated(created []string) {
	for i := len(created) - 1; i >= 0; i-- {
		if os.Remove(created[i]) != nil {
			return
		}
	}
}

// renameat2 is unix.Renameat2; tests replace it to run the fallbacks.
var renameat2 = unix.Renameat2

// unsupported reports whether renameat2 or one of its flags is not
// available (old kernels, some file systems).
func unsupported(err error) bool {
	return errors.Is(err, unix.EINVAL) || errors.Is(err, unix.ENOSYS)
}

// renameNoReplace renames old to new unless new exists, when it fails with
// an error that is fs.ErrExist. Without renameat2, a file is hard-linked to
// its new name, which fails if the name exists, and its old name removed; a
// folder is renamed, which fails over a non-empty folder. The errors name no
// paths.
func renameNoReplace(old, new string, folder bool) error {
	err := renameat2(unix.AT_FDCWD, old, unix.AT_FDCWD, new, unix.RENAME_NOREPLACE)
	if err == nil || !unsupported(err) {
		return err
	}
	if folder {
		err = os.Rename(old, new)
		if errors.Is(err, unix.ENOTEMPTY) {
			return unix.EEXIST
		}
		return bare(err)
	}
	err = os.Link(old, new)
	if errors.Is(err, unix.EPERM) || errors.Is(err, unix.EOPNOTSUPP) {
		// No hard links either (FAT, some network file systems): check,
		// then rename; another run may slip in between.
		if _, err := os.Lstat(new); err == nil {
			return unix.EEXIST
		}
		return bare(os.Rename(old, new))
	}
	if err != nil {
		return bare(err)
	}
	os.Remove(old)
	return nil
}

// syncPath flushes the file or folder at path to disk. File systems that
// cannot sync a folder (EINVAL) are not an error.
func syncPath(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	err = f.Sync()
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if errors.Is(err, unix.EINVAL) {
		return nil
	}
	return err
}

// syncFolders flushes the folder of path and the folders holding each of
// created, so that the new names survive a crash.
func syncFolders(path string, created []string) error {
	err := syncPath(filepath.Dir(filepath.Clean(path)))
	for _, c := range created {
		if serr := syncPath(filepath.Dir(c)); err == nil {
			err = serr
		}
	}
	return err
}
