// Package jobkit is the kernel every bandfold job is built on: the Env a
// job runs in (workers, logger, progress, version), usage errors and their
// classification, the run of a job as named steps, the checked inputs
// (stacks, band selections, masks, side files), the tile-scan engine that
// accumulates co-moments, shards, the minimum mapping unit, the writing of
// rendered rasters and the basis file.
//
// The layers of the job packages, each importing only the layers below it:
//
//	jobkit, report            the kernel and the HTML report and previews
//	series, changefolder      the engine for dates; the change folder's schema and report
//	learn, fold, pairchange,  the jobs: siblings that never import each other
//	timeline, areasurvey
//	demo, cli, cmd/bandfold   applications of the jobs
//
// A job is a function of typed options returning a typed result; none
// touches flags, standard streams or the process's exit. Every file and
// folder a job writes goes through the output lifecycle of
// bandfold/raster/output: written under a temporary name beside its target,
// renamed into place on success, removed on any error or cancellation.
package jobkit
