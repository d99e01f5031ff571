package jobkit

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"runtime"
	"time"

	"bandfold/raster"
	"bandfold/raster/output"
)

// Env is what the caller gives every job: the worker count, a logger for
// warnings and debug messages, an optional progress display and the tool
// version recorded in outputs.
type Env struct {
	// Workers is the number of tiles processed at once (at least 1; 0 means
	// one per CPU).
	Workers int
	// Log receives warnings (slog.LevelWarn) and details (slog.LevelDebug);
	// nil discards them.
	Log *slog.Logger
	// Progress, when set, returns the callback of one pass over pixels
	// (tiles done of total), or nil for none.
	Progress func(label string, pixels int64) func(done, total int)
	// Version is the tool version recorded in every output.
	Version string
}

func (e Env) WorkerCount() int {
	if e.Workers < 1 {
		return runtime.NumCPU()
	}
	return e.Workers
}

func (e Env) Logger() *slog.Logger {
	if e.Log == nil {
		return slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	return e.Log
}

func (e Env) ProgressFor(label string, pixels int64) func(done, total int) {
	if e.Progress == nil {
		return nil
	}
	return e.Progress(label, pixels)
}

// Warn logs a warning for the user.
func (e Env) Warn(format string, args ...any) {
	e.Logger().Warn(fmt.Sprintf(format, args...))
}

// UsageError marks an error in the options a user gave, as opposed to a
// failure while running; commands map it to exit code 2.
type UsageError struct{ Err error }

func (e *UsageError) Error() string { return e.Err.Error() }
func (e *UsageError) Unwrap() error { return e.Err }

// Usagef returns a usage error.
func Usagef(format string, args ...any) error {
	return &UsageError{fmt.Errorf(format, args...)}
}

// Usage marks err as a usage error (nil stays nil).
func Usage(err error) error {
	if err == nil {
		return nil
	}
	return &UsageError{err}
}

// IsUsage reports whether err is, or wraps, a usage error.
func IsUsage(err error) bool {
	var ue *UsageError
	return errors.As(err, &ue)
}

// ErrBatchFailed is returned when some scenes of a batch failed; each was
// reported in the batch's result.
var ErrBatchFailed = errors.New("some scenes failed")

// Canceled reports whether err comes from a cancelled context.
func Canceled(err error) bool {
	return errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded)
}

// Classify marks as usage errors the refusals that come from what the user
// typed rather than from the data: a band selection, nodata list, mask rule
// or creation option that cannot apply, and a GDAL virtual path as output.
func Classify(err error) error {
	if err == nil || IsUsage(err) {
		return err
	}
	if errors.Is(err, raster.ErrBadSpec) || errors.Is(err, raster.ErrBandRange) || errors.Is(err, output.ErrVirtual) || errors.Is(err, output.ErrInput) {
		return &UsageError{err}
	}
	return err
}

// JobStep is one step of a job's run: its name for the debug log and the
// run's method doing it.
type JobStep struct {
	Name string
	Do   func(context.Context) error
}

// Step names one step of a job's run.
func Step(name string, do func(context.Context) error) JobStep { return JobStep{Name: name, Do: do} }

// RunSteps runs steps in order, logging each one's duration at debug level
// under job; the first error ends the run and is returned as it is.
func RunSteps(ctx context.Context, env Env, job string, steps []JobStep) error {
	for _, step := range steps {
		start := time.Now()
		if err := step.Do(ctx); err != nil {
			return err
		}
		env.Logger().Debug(job+" step", "step", step.Name, "seconds", fmt.Sprintf("%.3f", time.Since(start).Seconds()))
	}
	return nil
}
