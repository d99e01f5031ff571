// Package survey holds the numerics of a reference survey of a classified
// map: the allocation of a stratified random sample (proportional with a
// minimum per stratum, or sized for a target standard error by Cochran 1977,
// Sampling Techniques, eq. 5.25), the seeded draw of sample positions, and
// the estimators of area and accuracy from the interpreted sample: the
// stratified estimator of Olofsson, Foody, Herold, Stehman, Woodcock &
// Wulder (2014, "Good practices for estimating area and assessing accuracy
// of land change", Remote Sensing of Environment 148:42-57) when the strata
// are the map classes, and the estimators of Stehman (2014, "Estimating area
// and map accuracy for stratified random sampling when the strata are
// different from the map classes", International Journal of Remote Sensing
// 35(13):4923-4939) for any strata.
//
// Variances omit the finite population correction, as Olofsson et al. (2014)
// do: samples are a negligible share of a map's pixels.
//
// The package knows nothing of rasters or GDAL.
package survey
