package main

import (
	"fmt"
	"io"
	"os"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// isTerminal reports whether w is a terminal.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// progress returns a tiles.Options.Progress callback that draws a bar on
// stderr (tiles done of total, pixels per second, time left), or nil when
// stderr is not a terminal or with --quiet or --json, so that bars never
// mix with machine-readable output or logs.
func (g *globals) progress(label string, pixels int64) func(done, total int) {
	if g.quiet || g.json || !isTerminal(g.stderr) {
		return nil
	}
	var bar *progressbar.ProgressBar
	start := time.Now()
	return func(done, total int) {
		if bar == nil {
			bar = progressbar.NewOptions(total,
				progressbar.OptionSetWriter(g.stderr),
				progressbar.OptionSetDescription(label),
				progressbar.OptionShowCount(),
				progressbar.OptionSetPredictTime(true),
				progressbar.OptionThrottle(100*time.Millisecond),
				progressbar.OptionSetWidth(30),
				progressbar.OptionClearOnFinish())
		}
		if s := time.Since(start).Seconds(); s > 0 && total > 0 {
			rate := float64(pixels) * float64(done) / float64(total) / s
			bar.Describe(fmt.Sprintf("%s %6.1f Mpx/s", label, rate/1e6))
		}
		bar.Set(done)
		if done == total {
			bar.Finish()
		}
	}
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
