// Package scenario generates bandfold's demo data: an invented place, the
// Vessel river catchment, seen by invented sensors, plus a generic cube
// synthesiser for benchmarks. Nothing here comes from a real place, sensor
// or data set.
//
// # The Vessel river catchment
//
// A valley some 20 km across at the default 2048 x 2048 size (10 m pixels):
// the Vessel river meanders west to east through the lower third, lined by
// reed wetlands and farmland in strips of fields on a slightly rotated
// grid; a town with a street grid sits on the north bank and a village on
// the south bank, linked by a valley road; grassland rises to wooded hills
// in the north (with rock outcrops and a quarry), where a stream runs down
// from the Vessel reservoir. Classes: water, forest (broadleaf/conifer
// mixtures), grassland (green/dry), cropland (green crop to ploughed),
// bare soil, urban (roofs, gardens, streets), wetland, and burnt.
//
// Two dates a year apart (date 0 "before", date 1 "after") are rendered by
// an 8-band multispectral sensor (blue to SWIR-2, see BandNames), as UInt16
// reflectance x 10000 with 0 as nodata. Between the dates three events
// change the land, each with a truth mask (TruthIDs):
//
//   - EventClearing: a forest block in the northern hills is felled (forest
//     -> bare soil with slash), about 0.7% of the scene;
//   - EventReservoir: the reservoir rises and floods its shore (land ->
//     water), about 0.9%;
//   - EventBurn: a fire on the western slopes (grassland/forest -> burnt,
//     dark in the NIR, brighter in the SWIR), about 0.9%.
//
// Unchanged land differs between the dates only by a per-band gain and
// offset, a different smooth illumination field and sensor noise.
//
// A Series shows the same catchment once a year on five dates (SeriesDates),
// each with its own collar, illumination, gain and offset and noise: a
// one-date cloud on date 2 (EventCloud, no change of the land), the
// clearing on date 3 and the burn on date 4, both lasting; the reservoir
// keeps its before level. Its truth (Series.TruthIDs, Series.Events) gives
// each event and its date.
//
// A 120-band hyperspectral cube (400-2500 nm, 30 m, Int16 reflectance x
// 10000, nodata -9999) shows date 1; each pixel is the linear mixture of
// its 3 x 3 block of 10 m ground, and residual water-vapour absorption near
// 1400 and 1900 nm leaves weak, noisy bands there.
//
// The layout (river, patches, events) is placed relative to the scene
// size, so every size shows the whole catchment and the event areas keep
// their fractions; textures keep their pixel scale.
//
// # Determinism and windows
//
// Every value is a pure function of (seed, x, y, band, date): random
// numbers come from splitmix64 hashes of the coordinates and smooth fields
// from fBm of hashed lattice values, with no generator state. Any window
// can be rendered alone, by any goroutine, and equals the same pixels cut
// from a larger render. Windows may reach outside the scene (nodata
// there). Scratch memory is up to about 60 bytes per 10 m pixel of the window on top of
// dst, so render big scenes in tiles (for example 512 x 512).
// Results are bit-identical on a given architecture; platforms that fuse
// floating-point multiply-adds may differ in the last digit.
package scenario
