package raster

// BandCount returns the number of bands of the files of a stack together:
// the bands --bands counts, before any selection. It opens each file alone,
// so files on other grids, and bands Open would refuse, are counted too. A
// Sentinel-2 product (its folder or metadata file, alone) counts the bands
// Open takes from it without a selection by name.
func BandCount(paths []string) (int, error) {
	if len(paths) == 1 && IsS2Product(paths[0]) {
		files, _, err := S2ProductFiles(paths[0], nil)
		if err != nil {
			return 0, err
		}
		paths = files
	}
	n := 0
	for _, p := range paths {
		ds, err := openDataset(p)
		if err != nil {
			return 0, err
		}
		n += len(ds.Bands())
		if err := ds.Close(errLogger); err != nil {
			return 0, err
		}
	}
	return n, nil
}
