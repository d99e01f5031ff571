package main

import (
	"time"

	"bandfold/cmd/bandfold/internal/cli"
)

// progressLines tunes the plain progress lines written where stderr is not
// a terminal (a log, a pipe); tests shorten After.
var progressLines = cli.LineOptions{Every: 30 * time.Second, After: 2 * time.Second}

// progress returns a pass's progress callback: a bar on a terminal, plain
// lines at every tenth or 30 s elsewhere (a Slurm log, a pipe), and nil
// with --quiet or --json, so that progress never mixes with
// machine-readable output.
func (g *globals) progress(label string, pixels int64) func(done, total int) {
	switch {
	case g.quiet || g.json:
		return nil
	case cli.IsTerminal(g.stderr):
		return cli.Bar(g.stderr, label, pixels)
	}
	return cli.Lines(g.stderr, g.command, label, progressLines)
}

// progressHook, when set (by tests only), is called after every tile of
// every pass, so a test can interrupt a run at a chosen point.
var progressHook func(label string, done, total int)

// passProgress is the job environment's progress: the bar, and the hook.
func (g *globals) passProgress(label string, pixels int64) func(done, total int) {
	bar := g.progress(label, pixels)
	if progressHook == nil {
		return bar
	}
	return func(done, total int) {
		if bar != nil {
			bar(done, total)
		}
		progressHook(label, done, total)
	}
}
