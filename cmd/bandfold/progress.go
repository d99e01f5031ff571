package main

import "bandfold/cmd/bandfold/internal/cli"

// progress returns a pass's progress callback: a bar on stderr, or nil when
// stderr is not a terminal or with --quiet or --json, so that bars never
// mix with machine-readable output or logs.
func (g *globals) progress(label string, pixels int64) func(done, total int) {
	if g.quiet || g.json || !cli.IsTerminal(g.stderr) {
		return nil
	}
	return cli.Bar(g.stderr, label, pixels)
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
