package cli

import (
	"bandfold/cmd/bandfold/internal/jobkit"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// IsTerminal reports whether w is a terminal.
func IsTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// Bar returns the progress callback of one pass over pixels labelled label:
// a bar on w (tiles done of total, pixels per second, time left).
func Bar(w io.Writer, label string, pixels int64) func(done, total int) {
	var bar *progressbar.ProgressBar
	start := time.Now()
	return func(done, total int) {
		if bar == nil {
			bar = progressbar.NewOptions(total,
				progressbar.OptionSetWriter(w),
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

// LineOptions tune Lines: Every is the longest quiet spell between lines
// (30 s), After the time a pass must run before its first line (2 s: short
// passes stay silent), Now the clock (time.Now).
type LineOptions struct {
	Every, After time.Duration
	Now          func() time.Time
}

// Lines returns the progress callback of one pass for a log or a pipe,
// where a bar cannot be drawn: a plain line at every tenth of the pass or
// after o.Every without one, such as
//
//	learn: co-moments 40% (1,024 of 2,560 tiles), 12 s elapsed, about 18 s left
//
// and nothing for a pass shorter than o.After.
func Lines(w io.Writer, job, label string, o LineOptions) func(done, total int) {
	if o.Now == nil {
		o.Now = time.Now
	}
	start := o.Now()
	last, lastTenth := start, 0
	return func(done, total int) {
		now := o.Now()
		if total <= 0 || now.Sub(start) < o.After {
			return
		}
		tenth := done * 10 / total
		if tenth == lastTenth && now.Sub(last) < o.Every && done != total {
			return
		}
		if done == total && lastTenth == 10 {
			return
		}
		last, lastTenth = now, tenth
		elapsed := now.Sub(start).Seconds()
		line := fmt.Sprintf("%s: %s %d%% (%s of %s tiles), %.0f s elapsed", job, label, done*100/total, jobkit.Count(int64(done)), jobkit.Count(int64(total)), elapsed)
		if done > 0 && done < total {
			line += fmt.Sprintf(", about %.0f s left", elapsed*float64(total-done)/float64(done))
		}
		fmt.Fprintln(w, line)
	}
}
