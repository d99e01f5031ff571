package raster

import (
	"cmp"
	"maps"
	"slices"
	"strings"
)

// Quality rules by name for the products' own quality layers, beside the
// plain bits= and values= rules they stand for.
//
// Landsat Collection 2 QA_PIXEL (USGS "Landsat 8-9 Collection 2 Level 2
// Science Product Guide", table "Pixel Quality Assessment (QA_PIXEL) Bit
// Index"; the same bits in the Level-1 QA_PIXEL band): a pixel is invalid
// where any named bit is set.
//
// Sentinel-2 Level-2A SCL, the scene classification (ESA "Sentinel-2 MSI
// Level-2A product format" and the Level-2A algorithm description, scene
// classification values): a pixel is invalid where its class is named.

// qaPixelBits are the QA_PIXEL bits by name.
var qaPixelBits = map[string][]int{
	"fill":          {0},
	"dilated_cloud": {1},
	"cirrus":        {2},
	"cloud":         {3},
	"cloud_shadow":  {4},
	"snow":          {5},
	"water":         {7},
	// clouds: every cloud-related flag at once.
	"clouds": {1, 2, 3, 4},
}

// sclValues are the SCL classes by name.
var sclValues = map[string][]float64{
	"no_data":                  {0},
	"saturated_or_defective":   {1},
	"dark_area_pixels":         {2},
	"cast_shadows":             {2}, // the name of class 2 since processing baseline 04.00
	"cloud_shadows":            {3},
	"vegetation":               {4},
	"not_vegetated":            {5},
	"water":                    {6},
	"unclassified":             {7},
	"cloud_medium_probability": {8},
	"cloud_high_probability":   {9},
	"thin_cirrus":              {10},
	"snow":                     {11},
	// clouds: cloud shadows, both cloud probabilities and thin cirrus.
	"clouds": {3, 8, 9, 10},
}

// namedRule turns a list of quality names of one product's layer ("qa_pixel"
// or "scl") into the bits or values they stand for.
func namedRule(layer, list string) (bits []int, values []ValueRange, err error) {
	if strings.TrimSpace(list) == "" {
		return nil, nil, specErr(ErrBadSpec, "empty %s name list", layer)
	}
	var set uint64
	seen := map[float64]bool{}
	for _, part := range strings.Split(list, ",") {
		name := strings.ToLower(strings.ReplaceAll(strings.TrimSpace(part), "-", "_"))
		switch layer {
		case "qa_pixel":
			b, ok := qaPixelBits[name]
			if !ok {
				return nil, nil, unknownName(layer, part, qaPixelBits)
			}
			for _, n := range b {
				set |= 1 << n
			}
		case "scl":
			v, ok := sclValues[name]
			if !ok {
				return nil, nil, unknownName(layer, part, sclValues)
			}
			for _, x := range v {
				if !seen[x] {
					seen[x] = true
					values = append(values, ValueRange{x, x})
				}
			}
		}
	}
	slices.SortFunc(values, func(a, b ValueRange) int { return cmp.Compare(a.Lo, b.Lo) })
	return bitList(set), values, nil
}

func unknownName[V any](layer, name string, known map[string]V) error {
	return specErr(ErrBadSpec, "%q is not a %s name (known: %s)", shorten(strings.TrimSpace(name)), layer, strings.Join(slices.Sorted(maps.Keys(known)), ", "))
}
