package output_test

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"bandfold/raster/output"
)

func ExampleWriteFile() {
	dir, _ := os.MkdirTemp("", "output-example-")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "reports", "basis.json")

	// The folder reports is made; the file appears whole or not at all.
	fmt.Println(output.WriteFile(path, []byte(`{"k":3}`), false))
	// An existing output is replaced only when asked.
	err := output.WriteFile(path, []byte(`{"k":4}`), false)
	fmt.Println(errors.Is(err, output.ErrExists))
	fmt.Println(output.WriteFile(path, []byte(`{"k":4}`), true))
	data, _ := os.ReadFile(path)
	fmt.Println(string(data))
	// Output:
	// <nil>
	// true
	// <nil>
	// {"k":4}
}

func ExampleFolder() {
	dir, _ := os.MkdirTemp("", "output-example-")
	defer os.RemoveAll(dir)
	final := filepath.Join(dir, "change")

	d, err := output.CreateFolder(final, false)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer d.Abort() // removes the temporary folder unless committed
	// Writers put their files inside the temporary folder.
	os.WriteFile(d.Path("summary.json"), []byte("{}"), 0o644)
	if err := d.Commit(); err != nil {
		fmt.Println(err)
		return
	}
	entries, _ := os.ReadDir(d.Final())
	for _, e := range entries {
		fmt.Println(e.Name())
	}
	// A folder that is not a previous output is never replaced.
	os.WriteFile(filepath.Join(final, "notes.txt"), []byte("mine"), 0o644)
	err = output.CheckFolder(final, true)
	fmt.Println(errors.Is(err, output.ErrForeignFolder))
	// Output:
	// bandfold-output.json
	// summary.json
	// true
}
