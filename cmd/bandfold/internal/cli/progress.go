package cli

import (
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
