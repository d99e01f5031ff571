// Package pairchange is the change job between two dates (Change): the
// series engine on a pair, and the change folder's own outputs (change map,
// Z, patches, preview, diagnostics, report, summary). Every output says that
// a change map is a screening result to verify against imagery or field
// checks.
package pairchange
