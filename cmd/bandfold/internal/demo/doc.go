// Package demo runs the whole tool on the invented scenario: Demo
// (compression of the hyperspectral cube, the change map of two dates scored
// against the truth and the timeline of the five-date series) and Synth (the
// scenario's scenes as files). It is an application of the job packages, as
// the commands are; only the command layer imports it.
package demo
