// Package series is the one engine for dates that change (a series of two)
// and timeline (of many) run through: opening and aligning the dates,
// resolving their acquisition dates, matching their bands by wavelength, one
// sample for every pair, the normalisation of every date onto the reference
// date, the pooled basis, each pair's no-change model and scorer, the map
// pass (the command's outputs plug in as MapHooks) and the minimum mapping
// unit. A behaviour that differs between the commands is a field of Config,
// never a second copy. It also owns the summary types the engine fills
// (NormalizationSummary, ThresholdSummary).
package series
