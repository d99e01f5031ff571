package raster

/*
#include <stdlib.h>
#include <cpl_conv.h>
#include <cpl_error.h>
#include <gdal.h>

// bandfoldSetClasses gives band b a thematic raster attribute table of n
// rows (value, name, red, green, blue, alpha; rgba holds 4 values a row)
// and, when categories is not NULL, GDAL category names, with errors kept
// off stderr. On failure *msg holds GDAL's message (free it with VSIFree).
static int bandfoldSetClasses(GDALRasterBandH b, int n, const int *values, char **names, const int *rgba, char **categories, char **msg) {
	static const char *colours[4] = {"red", "green", "blue", "alpha"};
	static const GDALRATFieldUsage usages[4] = {GFU_Red, GFU_Green, GFU_Blue, GFU_Alpha};
	CPLPushErrorHandler(CPLQuietErrorHandler);
	CPLErrorReset();
	GDALRasterAttributeTableH rat = GDALCreateRasterAttributeTable();
	CPLErr err = GDALRATCreateColumn(rat, "value", GFT_Integer, GFU_MinMax);
	if (err == CE_None) err = GDALRATCreateColumn(rat, "name", GFT_String, GFU_Name);
	for (int c = 0; c < 4 && err == CE_None; c++) err = GDALRATCreateColumn(rat, colours[c], GFT_Integer, usages[c]);
	if (err == CE_None) err = GDALRATSetTableType(rat, GRTT_THEMATIC);
	GDALRATSetRowCount(rat, n);
	for (int i = 0; i < n && err == CE_None; i++) {
		GDALRATSetValueAsInt(rat, i, 0, values[i]);
		GDALRATSetValueAsString(rat, i, 1, names[i]);
		for (int c = 0; c < 4; c++) GDALRATSetValueAsInt(rat, i, 2 + c, rgba[4 * i + c]);
	}
	if (err == CE_None) err = GDALSetDefaultRAT(b, rat);
	GDALDestroyRasterAttributeTable(rat);
	if (err == CE_None && categories != NULL) err = GDALSetRasterCategoryNames(b, categories);
	if (err != CE_None) *msg = CPLStrdup(CPLGetLastErrorMsg());
	CPLPopErrorHandler();
	return err;
}

// bandfoldClassColumns finds the columns of rat holding a class's value,
// name and colour (by their usage; -1 where missing), in cols[0..5].
static void bandfoldClassColumns(GDALRasterAttributeTableH rat, int *cols) {
	static const GDALRATFieldUsage usages[6] = {GFU_MinMax, GFU_Name, GFU_Red, GFU_Green, GFU_Blue, GFU_Alpha};
	for (int c = 0; c < 6; c++) cols[c] = GDALRATGetColOfUsage(rat, usages[c]);
}
*/
import "C"

import (
	"fmt"
	"image/color"
	"unsafe"

	"github.com/airbusgeo/godal"
)

// Class names and colours one value of a class raster (change, no change,
// nodata; a step's classes; a date).
type Class struct {
	Value int
	Name  string
	// Colour shows the class; an alpha of 0 makes it transparent, as
	// nodata usually is.
	Colour color.RGBA
}

// maxCategory is the largest value given a GDAL category name: category
// names are a list indexed by value, fit for small class codes only.
const maxCategory = 255

// setClasses styles band b with classes (see Spec.Classes): a raster
// attribute table, category names when every value is a small code, and
// a colour table when palette is set.
func setClasses(b godal.Band, classes []Class, palette bool) error {
	n := len(classes)
	if n == 0 {
		return nil
	}
	values := make([]C.int, n)
	rgba := make([]C.int, 4*n)
	names := newCStrings(n)
	defer names.free()
	small := true
	for i, c := range classes {
		values[i] = C.int(c.Value)
		names.set(i, c.Name)
		for j, v := range []uint8{c.Colour.R, c.Colour.G, c.Colour.B, c.Colour.A} {
			rgba[4*i+j] = C.int(v)
		}
		small = small && c.Value >= 0 && c.Value <= maxCategory
	}
	var categories **C.char
	if small {
		top := 0
		for _, c := range classes {
			top = max(top, c.Value)
		}
		cats := newCStrings(top + 1)
		defer cats.free()
		for _, c := range classes {
			cats.set(c.Value, c.Name)
		}
		categories = cats.list()
	}
	var msg *C.char
	if C.bandfoldSetClasses(bandHandle(b), C.int(n), &values[0], names.list(), &rgba[0], categories, &msg) != C.CE_None {
		text := C.GoString(msg)
		C.VSIFree(unsafe.Pointer(msg))
		return fmt.Errorf("class names: %s", firstLine(text))
	}
	if !palette {
		return nil
	}
	return b.SetColorTable(godal.ColorTable{PaletteInterp: godal.RGBPalette, Entries: colourTable(classes)}, errLogger)
}

// ReadClasses returns the classes of each band of the raster at path, as
// its raster attribute tables give them (nil for a band without one; an
// alpha of 255 where the table has no alpha column).
func ReadClasses(path string) ([][]Class, error) {
	ds, err := openWithAux(path)
	if err != nil {
		return nil, err
	}
	defer ds.Close(errLogger)
	var out [][]Class
	for _, b := range ds.Bands() {
		out = append(out, bandClasses(b))
	}
	return out, nil
}

// bandClasses reads the classes of band b's raster attribute table.
func bandClasses(b godal.Band) []Class {
	rat := C.GDALGetDefaultRAT(bandHandle(b))
	if rat == nil {
		return nil
	}
	var cols [6]C.int
	C.bandfoldClassColumns(rat, &cols[0])
	get := func(row, col C.int, missing int) int {
		if col < 0 {
			return missing
		}
		return int(C.GDALRATGetValueAsInt(rat, row, col))
	}
	var out []Class
	for row := range C.GDALRATGetRowCount(rat) {
		c := Class{Value: get(row, cols[0], 0)}
		if cols[1] >= 0 {
			c.Name = C.GoString(C.GDALRATGetValueAsString(rat, row, cols[1]))
		}
		c.Colour = color.RGBA{uint8(get(row, cols[2], 0)), uint8(get(row, cols[3], 0)), uint8(get(row, cols[4], 0)), uint8(get(row, cols[5], 255))}
		out = append(out, c)
	}
	return out
}

// colourTable returns the 256 entries of a Byte band's colour table:
// each class's colour at its value, transparent black elsewhere.
func colourTable(classes []Class) [][4]int16 {
	ct := make([][4]int16, 256)
	for _, c := range classes {
		if c.Value >= 0 && c.Value < len(ct) {
			ct[c.Value] = [4]int16{int16(c.Colour.R), int16(c.Colour.G), int16(c.Colour.B), int16(c.Colour.A)}
		}
	}
	return ct
}

// checkClasses panics on classes that name a value twice: a programmer's
// mistake.
func checkClasses(classes []Class) {
	seen := map[int]bool{}
	for _, c := range classes {
		if seen[c.Value] {
			panic(fmt.Sprintf("raster: class value %d named twice", c.Value))
		}
		seen[c.Value] = true
	}
}

// cStrings is a NULL-terminated C array of C strings ("" where unset).
type cStrings []*C.char

func newCStrings(n int) cStrings { return make(cStrings, n+1) }

func (s cStrings) set(i int, v string) {
	if s[i] != nil {
		C.free(unsafe.Pointer(s[i]))
	}
	s[i] = C.CString(v)
}

// list fills the unset entries with "" and returns the C array. Its
// memory is Go's: GDAL copies what it keeps.
func (s cStrings) list() **C.char {
	for i := range s[:len(s)-1] {
		if s[i] == nil {
			s[i] = C.CString("")
		}
	}
	return &s[0]
}

func (s cStrings) free() {
	for _, p := range s {
		if p != nil {
			C.free(unsafe.Pointer(p))
		}
	}
}
