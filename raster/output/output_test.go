package output

import (
	"bufio"
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"golang.org/x/sys/unix"
)

// The expected values in these tests are known by construction: each test
// makes the files and folders it then checks.

func writeFile(t *testing.T, path, content string) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
}

func readFile(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// entries lists the names in dir, sorted.
func entries(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

// noTemps fails when dir holds any temporary name.
func noTemps(t *testing.T, dir string) {
	t.Helper()
	for _, n := range entries(t, dir) {
		if strings.Contains(n, ".tmp") {
			t.Errorf("temporary %s left in %s", n, dir)
		}
	}
}

// checksums returns the SHA-256 of every file under root, by relative path.
func checksums(t *testing.T, root string) map[string]string {
	t.Helper()
	sums := map[string]string{}
	err := filepath.WalkDir(root, func(path string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		b, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, path)
		sums[rel] = fmt.Sprintf("%x", sha256.Sum256(b))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return sums
}

// deadPid returns the pid of a process that has exited and been waited for.
func deadPid(t *testing.T) int {
	t.Helper()
	cmd := exec.Command("true")
	if err := cmd.Run(); err != nil {
		t.Skipf("cannot run true: %v", err)
	}
	return cmd.Process.Pid
}

func TestCheck(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "exists.tif"), "x")
	writeFile(t, filepath.Join(dir, "file"), "x")
	os.Mkdir(filepath.Join(dir, "folder"), 0o755)
	for _, c := range []struct {
		path      string
		overwrite bool
		want      string // whole message; "" for accepted
		is        error
	}{
		{"new.tif", false, "", nil},
		{"missing/parents/new.tif", false, "", nil},
		{"exists.tif", true, "", nil},
		{"exists.tif", false, "output DIR/exists.tif exists (use --overwrite to replace it)", ErrExists},
		{"folder", true, "output DIR/folder is a folder", nil},
		{"file/new.tif", false, "output DIR/file/new.tif: DIR/file is not a folder", nil},
		{"file/deeper/new.tif", false, "output DIR/file/deeper/new.tif: DIR/file is not a folder", nil},
	} {
		path := filepath.Join(dir, c.path)
		err := Check(path, c.overwrite)
		want := strings.ReplaceAll(c.want, "DIR", dir)
		switch {
		case want == "" && err != nil:
			t.Errorf("%s: %v", c.path, err)
		case want != "" && (err == nil || err.Error() != want):
			t.Errorf("%s: got %v, want %s", c.path, err, want)
		case c.is != nil && !errors.Is(err, c.is):
			t.Errorf("%s: %v does not wrap %v", c.path, err, c.is)
		}
	}
	if err := Check("/vsimem/x.tif", true); !errors.Is(err, ErrVirtual) || !strings.HasPrefix(err.Error(), "output /vsimem/x.tif is a GDAL virtual path") {
		t.Errorf("virtual path: %v", err)
	}
}

func TestDistinctRefusesSameFile(t *testing.T) {
	dir := t.TempDir()
	t.Chdir(dir)
	writeFile(t, "in.tif", "input")
	os.Mkdir("x", 0o755)
	if err := os.Link("in.tif", "hard.tif"); err != nil {
		t.Skip("no hard links here:", err)
	}
	if err := os.Symlink("in.tif", "soft.tif"); err != nil {
		t.Fatal(err)
	}
	os.Mkdir("real", 0o755)
	os.Symlink("real", "linked")
	writeFile(t, "real/in2.tif", "input 2")
	in := Path{Role: "input", Path: "in.tif"}
	for _, c := range []struct {
		name    string
		inputs  []Path
		outputs []Path
		want    string // "" for accepted
	}{
		{"hard link", []Path{in}, []Path{{"output", "hard.tif", false}}, "output hard.tif is the same file as input in.tif"},
		{"symbolic link", []Path{in}, []Path{{"output", "soft.tif", false}}, "output soft.tif is the same file as input in.tif"},
		{"dot-dot spelling", []Path{in}, []Path{{"output", "./x/../in.tif", false}}, "output ./x/../in.tif is the same file as input in.tif"},
		{"absolute spelling", []Path{in}, []Path{{"output", filepath.Join(dir, "in.tif"), false}}, "output " + filepath.Join(dir, "in.tif") + " is the same file as input in.tif"},
		{"two new outputs", nil, []Path{{"basis", "b.json", false}, {"report", "./x/../b.json", false}}, "report ./x/../b.json is the same file as basis b.json"},
		{"two existing outputs", nil, []Path{{"basis", "in.tif", false}, {"report", "hard.tif", false}}, "report hard.tif is the same file as basis in.tif"},
		{"new output through a linked folder", nil, []Path{{"a", "real/new.tif", false}, {"b", "linked/new.tif", false}}, "b linked/new.tif is the same file as a real/new.tif"},
		{"folder holds an input", []Path{in}, []Path{{"output folder", ".", true}}, "output folder . holds input in.tif, which replacing the folder would delete"},
		{"folder is the input's folder", []Path{{"input", "real/in2.tif", false}}, []Path{{"output folder", "real", true}}, "output folder real holds input real/in2.tif, which replacing the folder would delete"},
		{"folder through a link holds an input", []Path{{"input", "real/in2.tif", false}}, []Path{{"output folder", "linked", true}}, "output folder linked holds input real/in2.tif, which replacing the folder would delete"},
		{"new folder holds an input", []Path{{"input", "new/in3.tif", false}}, []Path{{"output folder", "new", true}}, "output folder new holds input new/in3.tif, which replacing the folder would delete"},
		{"folder holds another output", nil, []Path{{"basis", "out/b.json", false}, {"output folder", "out", true}}, "output folder out holds basis out/b.json, which replacing the folder would delete"},
		{"distinct new outputs", []Path{in}, []Path{{"basis", "b.json", false}, {"output folder", "out", true}, {"map", "x/map.tif", false}}, ""},
		{"folder beside its input", []Path{{"input", "real/in2.tif", false}}, []Path{{"output folder", "realm", true}}, ""},
		{"empty paths skipped", []Path{in, {"mask", "", false}}, []Path{{"basis", "", false}, {"output", "b.json", false}}, ""},
	} {
		err := Distinct(c.inputs, c.outputs)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && (err == nil || err.Error() != c.want || !errors.Is(err, ErrSameFile)):
			t.Errorf("%s: got %v, want %s (ErrSameFile)", c.name, err, c.want)
		}
	}
}

func TestCreateCommitAbort(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.json")
	f, err := Create(path, false, ".json")
	if err != nil {
		t.Fatal(err)
	}
	if filepath.Dir(f.Temp()) != dir || !strings.HasPrefix(filepath.Base(f.Temp()), ".out.json.") || !strings.HasSuffix(f.Temp(), ".tmp.json") || f.Path() != path {
		t.Errorf("temporary %s for %s", f.Temp(), f.Path())
	}
	writeFile(t, f.Temp(), "new")
	writeFile(t, f.Temp()+".aux.xml", "sidecar")
	f.Sidecars(".aux.xml")
	if err := f.Commit(); err != nil { // Commit fsyncs the file and folder
		t.Fatal(err)
	}
	if got := readFile(t, path); got != "new" {
		t.Errorf("committed %q", got)
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"out.json"}) {
		t.Errorf("after Commit: %v", got)
	}
	// Abort after Commit does nothing; Commit again neither.
	f.Abort()
	if err := f.Commit(); err != nil {
		t.Error(err)
	}
	if got := readFile(t, path); got != "new" {
		t.Errorf("after Abort: %q", got)
	}

	// Abort removes the temporary and its sidecars, and is idempotent.
	g, err := Create(filepath.Join(dir, "other.json"), false, "")
	if err != nil {
		t.Fatal(err)
	}
	g.Sidecars("-wal")
	writeFile(t, g.Temp(), "half")
	writeFile(t, g.Temp()+"-wal", "half")
	g.Abort()
	g.Abort()
	if got := entries(t, dir); !slices.Equal(got, []string{"out.json"}) {
		t.Errorf("after Abort: %v", got)
	}
	if err := g.Commit(); err == nil {
		t.Error("Commit after Abort succeeded")
	}
}

func TestCreateMakesAndRemovesParents(t *testing.T) {
	dir := t.TempDir()
	os.Mkdir(filepath.Join(dir, "a"), 0o755)
	path := filepath.Join(dir, "a", "b", "c", "out.txt")
	f, err := Create(path, false, "")
	if err != nil {
		t.Fatal(err)
	}
	if fi, err := os.Stat(filepath.Join(dir, "a", "b", "c")); err != nil || !fi.IsDir() {
		t.Fatalf("parent not made: %v", err)
	}
	f.Abort()
	// a existed before: kept; b and c were made by Create: removed.
	if got := entries(t, dir); !slices.Equal(got, []string{"a"}) {
		t.Errorf("after Abort: %v", got)
	}
	if got := entries(t, filepath.Join(dir, "a")); len(got) != 0 {
		t.Errorf("made folders left after Abort: %v", got)
	}

	// A made folder that is no longer empty stays.
	f, err = Create(path, false, "")
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(dir, "a", "b", "keep.txt"), "someone else's")
	f.Abort()
	if got := entries(t, filepath.Join(dir, "a", "b")); !slices.Equal(got, []string{"keep.txt"}) {
		t.Errorf("non-empty folder: %v", got)
	}

	// After Commit the made folders stay.
	d, err := CreateFolder(filepath.Join(dir, "x", "y", "out"), false)
	if err != nil {
		t.Fatal(err)
	}
	d.Abort()
	if _, err := os.Stat(filepath.Join(dir, "x")); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("folder made by CreateFolder left after Abort: %v", err)
	}
	if err := WriteFile(filepath.Join(dir, "x", "y", "z.txt"), []byte("z"), false); err != nil {
		t.Fatal(err)
	}
	if got := readFile(t, filepath.Join(dir, "x", "y", "z.txt")); got != "z" {
		t.Errorf("WriteFile into new folders: %q", got)
	}
}

// TestCommitDoesNotReplace: a target that appears between Create and
// Commit is kept, without overwrite; replaced with it. Both with renameat2
// and with the fallback used where it is missing.
func TestCommitDoesNotReplace(t *testing.T) {
	for _, fallback := range []bool{false, true} {
		t.Run(fmt.Sprintf("fallback=%v", fallback), func(t *testing.T) {
			if fallback {
				withoutRenameat2(t)
			}
			dir := t.TempDir()
			path := filepath.Join(dir, "out.txt")
			f, err := Create(path, false, "")
			if err != nil {
				t.Fatal(err)
			}
			writeFile(t, f.Temp(), "ours")
			writeFile(t, path, "theirs")
			err = f.Commit()
			if !errors.Is(err, ErrExists) || err.Error() != "output "+path+" exists (use --overwrite to replace it)" {
				t.Errorf("Commit over a new target: %v", err)
			}
			if got := readFile(t, path); got != "theirs" {
				t.Errorf("target became %q", got)
			}
			noTemps(t, dir)

			f, err = Create(path, true, "")
			if err != nil {
				t.Fatal(err)
			}
			writeFile(t, f.Temp(), "ours")
			if err := f.Commit(); err != nil {
				t.Fatal(err)
			}
			if got := readFile(t, path); got != "ours" {
				t.Errorf("overwrite: target %q", got)
			}
			noTemps(t, dir)
		})
	}
}

// withoutRenameat2 makes renameat2 unsupported for the test, as on old
// kernels and some file systems.
func withoutRenameat2(t *testing.T) {
	t.Helper()
	renameat2 = func(int, string, int, string, uint) error { return unix.ENOSYS }
	t.Cleanup(func() { renameat2 = unix.Renameat2 })
}

// TestConcurrentCommits: goroutines that all created the same new target
// commit at once; exactly one wins, the others get ErrExists. With
// renameat2 and with its fallback.
func TestConcurrentCommits(t *testing.T) {
	t.Run("renameat2", func(t *testing.T) { concurrentCommits(t) })
	t.Run("fallback", func(t *testing.T) {
		withoutRenameat2(t)
		concurrentCommits(t)
	})
}

func concurrentCommits(t *testing.T) {
	const n = 8
	for _, folder := range []bool{false, true} {
		dir := t.TempDir()
		path := filepath.Join(dir, "out")
		commits := make([]func() error, n)
		for i := range commits {
			content := strconv.Itoa(i)
			if folder {
				d, err := CreateFolder(path, false)
				if err != nil {
					t.Fatal(err)
				}
				writeFile(t, d.Path("id"), content)
				commits[i] = d.Commit
			} else {
				f, err := Create(path, false, "")
				if err != nil {
					t.Fatal(err)
				}
				writeFile(t, f.Temp(), content)
				commits[i] = f.Commit
			}
		}
		errs := make([]error, n)
		var start, done sync.WaitGroup
		start.Add(1)
		for i := range commits {
			done.Go(func() {
				start.Wait()
				errs[i] = commits[i]()
			})
		}
		start.Done()
		done.Wait()
		winner := -1
		for i, err := range errs {
			switch {
			case err == nil && winner >= 0:
				t.Errorf("folder=%v: commits %d and %d both succeeded", folder, winner, i)
			case err == nil:
				winner = i
			case !errors.Is(err, ErrExists):
				t.Errorf("folder=%v: commit %d: %v", folder, i, err)
			}
		}
		got := path
		if folder {
			got = filepath.Join(path, "id")
		}
		if winner < 0 || readFile(t, got) != strconv.Itoa(winner) {
			t.Errorf("folder=%v: winner %d, target holds %q", folder, winner, readFile(t, got))
		}
		noTemps(t, dir)
	}
}

// The helper process of TestConcurrentProcesses: it creates the target
// named in its environment, says "ready", waits for a line on stdin, then
// commits and exits 0 on success, 3 on ErrExists, 1 otherwise.
func TestHelperProcess(t *testing.T) {
	path := os.Getenv("OUTPUT_TEST_TARGET")
	if path == "" {
		t.Skip("helper process only")
	}
	var commit func() error
	if os.Getenv("OUTPUT_TEST_FOLDER") != "" {
		d, err := CreateFolder(path, false)
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		os.WriteFile(d.Path("id"), []byte(strconv.Itoa(os.Getpid())), 0o644)
		commit = d.Commit
	} else {
		f, err := Create(path, false, "")
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		os.WriteFile(f.Temp(), []byte(strconv.Itoa(os.Getpid())), 0o644)
		commit = f.Commit
	}
	fmt.Println("ready")
	bufio.NewReader(os.Stdin).ReadString('\n')
	err := commit()
	switch {
	case err == nil:
		os.Exit(0)
	case errors.Is(err, ErrExists):
		os.Exit(3)
	}
	fmt.Fprintln(os.Stderr, err)
	os.Exit(1)
}

// TestConcurrentProcesses: processes (this test binary run again) that all
// created the same new file or folder commit at once; exactly one wins.
func TestConcurrentProcesses(t *testing.T) {
	if os.Getenv("OUTPUT_TEST_TARGET") != "" {
		return
	}
	const n = 4
	for _, folder := range []string{"", "yes"} {
		dir := t.TempDir()
		path := filepath.Join(dir, "out")
		type proc struct {
			cmd *exec.Cmd
			in  interface{ Close() error }
		}
		var procs []proc
		for range n {
			cmd := exec.Command(os.Args[0], "-test.run=^TestHelperProcess$")
			cmd.Env = append(os.Environ(), "OUTPUT_TEST_TARGET="+path, "OUTPUT_TEST_FOLDER="+folder)
			in, err := cmd.StdinPipe()
			if err != nil {
				t.Fatal(err)
			}
			out, err := cmd.StdoutPipe()
			if err != nil {
				t.Fatal(err)
			}
			cmd.Stderr = os.Stderr
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			if line, _ := bufio.NewReader(out).ReadString('\n'); line != "ready\n" {
				t.Fatalf("helper said %q", line)
			}
			procs = append(procs, proc{cmd, in})
		}
		for _, p := range procs {
			p.in.Close() // go: all commit at once
		}
		winners, losers := map[int]bool{}, 0
		for _, p := range procs {
			err := p.cmd.Wait()
			var ee *exec.ExitError
			switch {
			case err == nil:
				winners[p.cmd.Process.Pid] = true
			case errors.As(err, &ee) && ee.ExitCode() == 3:
				losers++
			default:
				t.Errorf("helper: %v", err)
			}
		}
		if len(winners) != 1 || losers != n-1 {
			t.Errorf("folder=%q: %d winners, %d refused, want 1 and %d", folder, len(winners), losers, n-1)
		}
		got := path
		if folder != "" {
			got = filepath.Join(path, "id")
		}
		if pid, _ := strconv.Atoi(readFile(t, got)); !winners[pid] {
			t.Errorf("folder=%q: target written by %d, winners %v", folder, pid, winners)
		}
		noTemps(t, dir)
	}
}

func TestWriteFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "basis.json")
	if err := WriteFile(path, []byte("one"), false); err != nil {
		t.Fatal(err)
	}
	if err := WriteFile(path, []byte("two"), false); !errors.Is(err, ErrExists) {
		t.Errorf("existing target: %v", err)
	}
	if err := WriteFile(path, []byte("three"), true); err != nil {
		t.Fatal(err)
	}
	if got := readFile(t, path); got != "three" {
		t.Errorf("target %q", got)
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"basis.json"}) {
		t.Errorf("folder holds %v", got)
	}
}

// commitFolder writes a folder output at path holding the given files.
func commitFolder(t *testing.T, path string, overwrite bool, files map[string]string) error {
	t.Helper()
	d, err := CreateFolder(path, overwrite)
	if err != nil {
		return err
	}
	defer d.Abort()
	for name, content := range files {
		writeFile(t, d.Path(name), content)
	}
	return d.Commit()
}

func TestFolderManifest(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "change")
	if err := commitFolder(t, path, false, map[string]string{"magnitude.tif": "m", "sub/x.txt": "x"}); err != nil {
		t.Fatal(err)
	}
	var m struct {
		Format string   `json:"format"`
		Files  []string `json:"files"`
	}
	if err := json.Unmarshal([]byte(readFile(t, filepath.Join(path, ManifestName))), &m); err != nil {
		t.Fatal(err)
	}
	if want := []string{ManifestName, "magnitude.tif", "sub"}; m.Format != "bandfold-output" || !slices.Equal(m.Files, want) {
		t.Errorf("manifest %+v, want format bandfold-output and files %v", m, want)
	}
	noTemps(t, dir)
}

// TestFolderPreviousOutput: a previous output is refused without overwrite
// and replaced whole with it.
func TestFolderPreviousOutput(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "change")
	if err := commitFolder(t, path, false, map[string]string{"old.tif": "old"}); err != nil {
		t.Fatal(err)
	}
	err := commitFolder(t, path, false, map[string]string{"new.tif": "new"})
	if !errors.Is(err, ErrExists) || err.Error() != "output "+path+" exists (use --overwrite to replace it)" {
		t.Errorf("without overwrite: %v", err)
	}
	if err := commitFolder(t, path, true, map[string]string{"new.tif": "new"}); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, path); !slices.Equal(got, []string{ManifestName, "new.tif"}) {
		t.Errorf("replaced folder holds %v", got)
	}
	noTemps(t, dir)
}

// TestFolderForeignRefused: a folder that is not a previous output is
// refused with and without overwrite, and nothing in it is touched.
func TestFolderForeignRefused(t *testing.T) {
	for _, c := range []struct {
		name  string
		files map[string]string
		why   string
	}{
		{"no manifest", map[string]string{"notes.txt": "mine"}, "(no " + ManifestName + ")"},
		{"manifest and an unlisted file", map[string]string{
			ManifestName:    `{"format":"bandfold-output","files":["` + ManifestName + `","magnitude.tif"]}`,
			"magnitude.tif": "m", "notes.txt": "mine"}, "(notes.txt is not listed in its " + ManifestName + ")"},
		{"someone else's manifest", map[string]string{ManifestName: `{"format":"other","files":[]}`}, "(" + ManifestName + " is not bandfold's)"},
	} {
		dir := t.TempDir()
		path := filepath.Join(dir, "change")
		for name, content := range c.files {
			writeFile(t, filepath.Join(path, name), content)
		}
		before := checksums(t, dir)
		for _, overwrite := range []bool{false, true} {
			err := CheckFolder(path, overwrite)
			want := "output " + path + " holds files that are not a previous bandfold output " + c.why
			if !errors.Is(err, ErrForeignFolder) || err.Error() != want {
				t.Errorf("%s, overwrite=%v: CheckFolder: got %v, want %s", c.name, overwrite, err, want)
			}
			if err := commitFolder(t, path, overwrite, map[string]string{"x": "x"}); !errors.Is(err, ErrForeignFolder) {
				t.Errorf("%s, overwrite=%v: CreateFolder: %v", c.name, overwrite, err)
			}
		}
		if after := checksums(t, dir); !mapsEqual(before, after) {
			t.Errorf("%s: folder changed: %v -> %v", c.name, before, after)
		}
	}
}

func mapsEqual(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return true
}

// TestFolderForeignAtCommit: a folder that becomes foreign between
// CreateFolder and Commit is not replaced, even with overwrite.
func TestFolderForeignAtCommit(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "change")
	d, err := CreateFolder(path, true)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(path, "notes.txt"), "mine")
	if err := d.Commit(); !errors.Is(err, ErrForeignFolder) {
		t.Errorf("Commit: %v", err)
	}
	if got := entries(t, path); !slices.Equal(got, []string{"notes.txt"}) {
		t.Errorf("folder holds %v", got)
	}
	noTemps(t, dir)
}

func TestFolderEmptyAccepted(t *testing.T) {
	for _, overwrite := range []bool{false, true} {
		dir := t.TempDir()
		path := filepath.Join(dir, "change")
		os.Mkdir(path, 0o755)
		if err := commitFolder(t, path, overwrite, map[string]string{"a.tif": "a"}); err != nil {
			t.Fatalf("overwrite=%v: %v", overwrite, err)
		}
		if got := entries(t, path); !slices.Equal(got, []string{"a.tif", ManifestName}) {
			t.Errorf("overwrite=%v: folder holds %v", overwrite, got)
		}
		noTemps(t, dir)
	}
}

func TestCheckFolderRefusesNonFolders(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "file"), "x")
	os.Mkdir(filepath.Join(dir, "real"), 0o755)
	os.Symlink("real", filepath.Join(dir, "link"))
	for _, c := range []struct{ name, want string }{
		{"file", "output DIR/file is a file, not a folder"},
		{"link", "output DIR/link is a symbolic link (give the folder it points to)"},
		{"file/sub", "output DIR/file/sub: DIR/file is not a folder"},
	} {
		err := CheckFolder(filepath.Join(dir, c.name), true)
		if want := strings.ReplaceAll(c.want, "DIR", dir); err == nil || err.Error() != want {
			t.Errorf("%s: got %v, want %s", c.name, err, want)
		}
	}
	if err := CheckFolder("/vsis3/bucket/out", true); !errors.Is(err, ErrVirtual) {
		t.Errorf("virtual path: %v", err)
	}
}

// TestFolderSwapFallback: without renameat2 the previous output is moved
// aside, the new one moved in and the old one removed. A failure at any of
// these steps leaves the old or the new output whole at the target.
func TestFolderSwapFallback(t *testing.T) {
	old := map[string]string{"a.tif": "old a", "b.tif": "old b"}
	for _, c := range []struct {
		fail    string // step that fails; "" for none
		wantNew bool   // the new output is at the target
		wantErr bool
	}{
		{"", true, false},
		{"aside", false, true},
		{"in", false, true},
		{"remove", true, false},
	} {
		t.Run("fail="+c.fail, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "change")
			if err := commitFolder(t, path, false, old); err != nil {
				t.Fatal(err)
			}
			oldSums := checksums(t, path)
			withoutRenameat2(t)
			failStep = func(step string) error {
				if step == c.fail {
					return errors.New("simulated failure")
				}
				return nil
			}
			t.Cleanup(func() { failStep = nil })
			err := commitFolder(t, path, true, map[string]string{"new.tif": "new"})
			if (err != nil) != c.wantErr {
				t.Errorf("Commit: %v", err)
			}
			got := checksums(t, path)
			if c.wantNew {
				if want := []string{ManifestName, "new.tif"}; !slices.Equal(entries(t, path), want) || readFile(t, filepath.Join(path, "new.tif")) != "new" {
					t.Errorf("target holds %v, want the new output", got)
				}
			} else if !mapsEqual(got, oldSums) {
				t.Errorf("target holds %v, want the old output %v", got, oldSums)
			}
			left := 0
			for _, n := range entries(t, dir) {
				if n == "change" {
					continue
				}
				left++
				// Only a failed removal leaves something: the old output,
				// whole, under a temporary name a later run removes.
				if c.fail != "remove" {
					t.Errorf("left %s", n)
				} else if !mapsEqual(checksums(t, filepath.Join(dir, n)), oldSums) {
					t.Errorf("old output aside at %s is not whole", n)
				}
			}
			if c.fail == "remove" && left != 1 {
				t.Errorf("%d entries left beside the target, want the old output", left)
			}
		})
	}
}

func TestTempNames(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"node-01.cluster.example", "node-01"},
		{"my_host", "my-host"},
		{"", "localhost"},
	} {
		if got := shortHost(c.in, nil); got != c.want {
			t.Errorf("shortHost(%q) = %q, want %q", c.in, got, c.want)
		}
	}
	a, b := tempName("/d/out.tif", ".tif"), tempName("/d/out.tif", ".tif")
	if a == b {
		t.Errorf("two temporaries named %s", a)
	}
	host, pid, ok := owner(filepath.Base(a), "out.tif")
	if !ok || host != hostName() || pid != os.Getpid() {
		t.Errorf("owner(%s) = %s %d %v", a, host, pid, ok)
	}
	for _, c := range []struct {
		name, base string
		host       string
		pid        int
		ok         bool
	}{
		{".out.tif.node1.42.7.tmp.tif", "out.tif", "node1", 42, true},
		{".out.tif.node1.42.7.tmp.tif.aux.xml", "out.tif", "node1", 42, true},
		{".out.tif.42.tmp.tif", "out.tif", "", 42, true}, // old scheme
		{".change.42.tmp", "change", "", 42, true},       // old folder scheme
		{".out.tif.vm.42.7.tmp", "out", "", 0, false},    // another target's
		{".out.node1.42.7.tmp", "out.tif", "", 0, false}, // another target's
		{".out.tif.node1.x.7.tmp", "out.tif", "", 0, false},
		{"out.tif", "out.tif", "", 0, false},
	} {
		host, pid, ok := owner(c.name, c.base)
		if host != c.host || pid != c.pid || ok != c.ok {
			t.Errorf("owner(%s, %s) = %q %d %v, want %q %d %v", c.name, c.base, host, pid, ok, c.host, c.pid, c.ok)
		}
	}
}

// TestLongNames (issue 24, item 12): an output name that is legal but long
// (246 bytes, with multi-byte characters) is written under its own name; its
// temporaries, sidecar included, stay under the 255 bytes a file name may
// have, and a dead run's temporary of that name is recognised as stale.
func TestLongNames(t *testing.T) {
	for _, base := range []string{
		strings.Repeat("a", 242) + ".tif",
		strings.Repeat("é", 121) + ".tif",
		strings.Repeat("b", 251) + ".tif", // 255 bytes: the longest legal name
	} {
		dir := t.TempDir()
		path := filepath.Join(dir, base)
		f, err := Create(path, false, ".tif")
		if err != nil {
			t.Fatalf("%d bytes: %v", len(base), err)
		}
		if n := len(filepath.Base(f.Temp()) + ".aux.xml"); n > 255 {
			t.Errorf("%d bytes: temporary with sidecar has %d bytes", len(base), n)
		}
		if err := os.WriteFile(f.Temp(), []byte("x"), 0o644); err != nil {
			t.Fatalf("%d bytes: %v", len(base), err)
		}
		f.Sidecars(".aux.xml")
		if err := os.WriteFile(f.Temp()+".aux.xml", []byte("x"), 0o644); err != nil {
			t.Fatalf("%d bytes: %v", len(base), err)
		}
		if err := f.Commit(); err != nil {
			t.Fatalf("%d bytes: %v", len(base), err)
		}
		if got := entries(t, dir); !slices.Equal(got, []string{base}) {
			t.Errorf("%d bytes: folder holds %q, want only the output", len(base), got)
		}
		if host, pid, ok := owner(filepath.Base(tempName(path, ".tif")), base); !ok || host != hostName() || pid != os.Getpid() {
			t.Errorf("%d bytes: owner = %q %d %v", len(base), host, pid, ok)
		}
		if _, _, ok := owner(filepath.Base(tempName(path+"x", ".tif")), base); ok {
			t.Errorf("%d bytes: another long name's temporary taken as this one's", len(base))
		}
	}
}

// TestStaleCleanup: temporaries of this target left by a dead process on
// this host are removed, files and folders, new and old scheme; another
// host's, a live process's and other targets' are kept.
func TestStaleCleanup(t *testing.T) {
	dead := deadPid(t)
	live := os.Getppid()
	me := hostName()
	for _, folder := range []bool{false, true} {
		dir := t.TempDir()
		stale := []string{
			fmt.Sprintf(".out.%s.%d.1.tmp", me, dead),
			fmt.Sprintf(".out.%s.%d.2.tmp.tif", me, dead),
			fmt.Sprintf(".out.%s.%d.2.tmp.tif.aux.xml", me, dead),
			fmt.Sprintf(".out.%d.tmp", dead),     // raster.TempPath, earlier releases
			fmt.Sprintf(".out.%d.tmp.tif", dead), // the same with a suffix
		}
		kept := []string{
			fmt.Sprintf(".out.otherhost.%d.1.tmp", dead),
			fmt.Sprintf(".out.%s.%d.1.tmp", me, live),
			fmt.Sprintf(".out.%d.tmp", live),
			fmt.Sprintf(".out.%s.%d.999999.tmp", me, os.Getpid()), // this process's own
			fmt.Sprintf(".other.%s.%d.1.tmp", me, dead),
			"notes.txt",
		}
		for _, n := range stale[:1] {
			// a stale folder, as a killed change run leaves
			writeFile(t, filepath.Join(dir, n, "magnitude.tif"), "half")
		}
		for _, n := range append(stale[1:], kept...) {
			writeFile(t, filepath.Join(dir, n), "x")
		}
		var err error
		if folder {
			var d *Folder
			if d, err = CreateFolder(filepath.Join(dir, "out"), false); err == nil {
				d.Abort()
			}
		} else {
			var f *File
			if f, err = Create(filepath.Join(dir, "out"), false, ""); err == nil {
				f.Abort()
			}
		}
		if err != nil {
			t.Fatal(err)
		}
		slices.Sort(kept)
		if got := entries(t, dir); !slices.Equal(got, kept) {
			t.Errorf("folder=%v: left %v, want %v", folder, got, kept)
		}
	}
}

// TestErrorsNamePathOnce: messages are one line and name the path once.
func TestErrorsNamePathOnce(t *testing.T) {
	dir := t.TempDir()
	// A temporary never written.
	unwritten := filepath.Join(dir, "unwritten.txt")
	f, err := Create(unwritten, false, "")
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Commit(); err == nil || strings.Count(err.Error(), unwritten) != 1 || strings.Contains(err.Error(), "\n") {
		t.Errorf("got %v, want one line naming %s once", err, unwritten)
	}
}

func TestErrorsReadOnlyFolder(t *testing.T) {
	dir := t.TempDir()
	ro := filepath.Join(dir, "ro")
	os.Mkdir(ro, 0o555)
	t.Cleanup(func() { os.Chmod(ro, 0o755) })
	if f, err := os.Create(filepath.Join(ro, "probe")); err == nil {
		f.Close()
		t.Skip("running with permission to write a read-only folder (root)")
	}
	path := filepath.Join(ro, "out.txt")
	err := WriteFile(path, []byte("x"), false)
	if err == nil || strings.Count(err.Error(), path) != 1 || strings.Contains(err.Error(), "\n") {
		t.Errorf("got %v, want one line naming %s once", err, path)
	}
}

// TestFolderFinalNames: an error naming a file inside the temporary folder
// names it inside the final folder instead, and still matches its cause
// (known by construction).
func TestFolderFinalNames(t *testing.T) {
	final := filepath.Join(t.TempDir(), "chg")
	d, err := CreateFolder(final, false)
	if err != nil {
		t.Fatal(err)
	}
	defer d.Abort()
	cause := errors.New("disk full")
	err = d.FinalNames(fmt.Errorf("write %s: %w", d.Path("change.tif"), cause))
	if want := "write " + filepath.Join(final, "change.tif") + ": disk full"; err.Error() != want || !errors.Is(err, cause) {
		t.Errorf("got %q (is cause %v), want %q", err, errors.Is(err, cause), want)
	}
	var none *Folder
	if got := none.FinalNames(cause); got != cause {
		t.Errorf("nil folder changed the error: %v", got)
	}
}

// TestCompanions: a companion the writer made goes beside the committed
// file, replacing one there; one left beside the target that the writer
// made none for is removed, as it would describe another file; Abort
// removes the writer's. Known by construction.
func TestCompanions(t *testing.T) {
	tests := []struct {
		name       string
		made, left bool // a companion made by the writer; one left beside the target
		abort      bool
		want       []string
		wantAux    string
	}{
		{"made", true, false, false, []string{"out.tif", "out.tif.aux.xml"}, "new"},
		{"made, replacing one left", true, true, false, []string{"out.tif", "out.tif.aux.xml"}, "new"},
		{"none made, one left", false, true, false, []string{"out.tif"}, ""},
		{"none", false, false, false, []string{"out.tif"}, ""},
		{"aborted", true, true, true, []string{"out.tif.aux.xml"}, "old"},
	}
	for _, tc := range tests {
		dir := t.TempDir()
		path := filepath.Join(dir, "out.tif")
		if tc.left {
			writeFile(t, path+".aux.xml", "old")
		}
		f, err := Create(path, false, ".tif")
		if err != nil {
			t.Fatal(err)
		}
		f.Companions(".aux.xml")
		writeFile(t, f.Temp(), "tif")
		if tc.made {
			writeFile(t, f.Temp()+".aux.xml", "new")
		}
		if tc.abort {
			f.Abort()
		} else if err := f.Commit(); err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if got := entries(t, dir); !slices.Equal(got, tc.want) {
			t.Errorf("%s: files %v, want %v", tc.name, got, tc.want)
		}
		if tc.wantAux != "" {
			if got := readFile(t, path+".aux.xml"); got != tc.wantAux {
				t.Errorf("%s: companion holds %q, want %q", tc.name, got, tc.wantAux)
			}
		}
	}
}
