// Package jobtest is what the job packages' tests share: the set-up of GDAL
// and the BLAS (Main), the real test scenes of make testdata, small scenes
// written on the fly, and runners of the jobs with the checks every run gets
// (nothing left behind, errors in the user's words). Tests that span several
// jobs live here too.
package jobtest
