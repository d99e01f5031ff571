package raster

import "github.com/airbusgeo/godal"

// DateSource is one piece of metadata that may give a scene's date.
type DateSource struct {
	// Key names the source: "TIFFTAG_DATETIME", "IMAGERY:ACQUISITIONDATETIME",
	// "ACQUISITION_DATE" or "MTL:DATE_ACQUIRED".
	Key   string
	Value string
}

// DateMetadata returns the metadata of the raster at path that may date it,
// in order of preference: the TIFF DateTime tag, ACQUISITIONDATETIME of the
// IMAGERY domain, ACQUISITION_DATE (as bandfold's demo writes), and the
// DATE_ACQUIRED of a Landsat *_MTL.txt beside it that lists the file. Only
// the sources present are returned; a missing MTL file is not an error.
func DateMetadata(path string) ([]DateSource, error) {
	ds, err := openDataset(path)
	if err != nil {
		return nil, err
	}
	defer ds.Close(errLogger)
	var out []DateSource
	add := func(key, value string) {
		if value != "" {
			out = append(out, DateSource{Key: key, Value: value})
		}
	}
	add("TIFFTAG_DATETIME", ds.Metadata("TIFFTAG_DATETIME"))
	add("IMAGERY:ACQUISITIONDATETIME", ds.Metadata("ACQUISITIONDATETIME", godal.Domain("IMAGERY")))
	add("ACQUISITION_DATE", ds.Metadata("ACQUISITION_DATE"))
	if m, err := findMTL(path, ReadMTL); err == nil {
		add("MTL:DATE_ACQUIRED", m.DateAcquired)
	}
	return out, nil
}
