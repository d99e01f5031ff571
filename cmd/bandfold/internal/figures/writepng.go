package figures

import (
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
)

// WritePNG encodes img as PNG to path atomically: it writes a temporary
// file in the same folder and renames it over path, so readers never
// see a partial file. On error the temporary file is removed and path
// is left as it was.
func WritePNG(path string, img image.Image) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp-*")
	if err != nil {
		return fmt.Errorf("figures: write %s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
			err = fmt.Errorf("figures: write %s: %w", path, err)
		}
	}()
	if err = png.Encode(f, img); err != nil {
		return err
	}
	if err = f.Chmod(0o644); err != nil {
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}
