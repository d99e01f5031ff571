package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"runtime"
	"runtime/debug"
	"strings"
	"syscall"

	"github.com/spf13/cobra"

	"bandfold/bands/openblas"
	"bandfold/raster"
)

// version is the tool version recorded in every output; set at build time
// with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

// Exit codes.
const (
	exitOK      = 0
	exitFailure = 1 // runtime failure, including any failed item of a batch
	exitUsage   = 2 // bad command line
)

// globals holds the flags shared by every command and the streams commands
// write to.
type globals struct {
	json    bool
	quiet   bool
	verbose bool
	workers int
	stdout  io.Writer
	stderr  io.Writer
	log     *slog.Logger
}

// usageError marks an error in what the user typed, as opposed to a failure
// while running; it maps to exit code 2.
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

// usagef returns a usage error.
func usagef(format string, args ...any) error { return usageError{fmt.Errorf(format, args...)} }

func run(args []string, stdout, stderr io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	g := &globals{stdout: stdout, stderr: stderr}
	root := newRootCommand(g)
	root.SetArgs(args)
	root.SetOut(stdout)
	root.SetErr(stderr)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return exitOK
	}
	if errors.Is(err, errBatchFailed) {
		return exitFailure // items already reported
	}
	msg := strings.ReplaceAll(err.Error(), "\n", "; ")
	if errors.Is(err, context.Canceled) {
		msg = "interrupted; partial outputs removed"
	}
	fmt.Fprintf(stderr, "bandfold: %s\n", msg)
	var ue usageError
	if errors.As(err, &ue) || isCobraUsage(err) {
		return exitUsage
	}
	return exitFailure
}

// errBatchFailed is returned when some items of a batch failed; each was
// reported on its own line already.
var errBatchFailed = errors.New("some items failed")

// isCobraUsage recognises cobra's own command-line errors (unknown flags,
// bad flag values, wrong argument counts, unknown commands).
func isCobraUsage(err error) bool {
	s := err.Error()
	for _, p := range []string{"unknown flag", "unknown shorthand", "unknown command", "invalid argument", "flag needs an argument", "accepts ", "requires at least", "requires at most", "required flag", "at least one of the flags", "if any flags in the group"} {
		if strings.Contains(s, p) {
			return true
		}
	}
	return false
}

func newRootCommand(g *globals) *cobra.Command {
	root := &cobra.Command{
		Use:   "bandfold",
		Short: "Principal components, compression and change maps for multiband imagery",
		Long: `bandfold fits a principal component basis of multiband and hyperspectral
rasters in bounded memory (band covariance accumulated tile by tile), writes
component images as GeoTIFF, reconstructs bands from a few components with a
measured loss, and maps land-cover change between two dates.

An IMAGE argument is one GDAL-readable raster, or several files on one grid
joined with commas ("b2.tif,b3.tif,b4.tif"), stacked in that order as one
image. A pixel counts only when it is valid in every selected band.`,
		Example: `  bandfold demo --dir demo-out
  bandfold learn scene.tif --out scene.basis.json
  bandfold fold scene.tif --basis scene.basis.json --out scene.components.tif`,
		SilenceErrors: true,
		SilenceUsage:  true,
		PersistentPreRunE: func(cmd *cobra.Command, _ []string) error {
			return g.setup()
		},
	}
	root.SetFlagErrorFunc(func(_ *cobra.Command, err error) error { return usageError{err} })
	f := root.PersistentFlags()
	f.BoolVar(&g.json, "json", false, "print the command's summary as JSON on stdout (human text goes to stderr)")
	f.IntVar(&g.workers, "workers", runtime.NumCPU(), "number of parallel workers")
	f.BoolVarP(&g.quiet, "quiet", "q", false, "print only errors")
	f.BoolVarP(&g.verbose, "verbose", "v", false, "print debug messages")
	root.MarkFlagsMutuallyExclusive("quiet", "verbose")

	root.AddCommand(
		newLearnCommand(g),
		newMergeCommand(g),
		newFoldCommand(g),
		newUnfoldCommand(g),
		newChangeCommand(g),
		newInspectCommand(g),
		newDemoCommand(g),
	)
	return root
}

// setup runs before every command: logging, worker count, memory limit and
// GDAL's configuration, which must precede the first GDAL call.
func (g *globals) setup() error {
	level := slog.LevelInfo
	switch {
	case g.verbose:
		level = slog.LevelDebug
	case g.quiet:
		level = slog.LevelError
	}
	g.log = slog.New(slog.NewTextHandler(g.stderr, &slog.HandlerOptions{Level: level}))
	slog.SetDefault(g.log)
	if g.workers < 1 {
		return usagef("--workers %d: need at least 1", g.workers)
	}
	// A soft limit makes the collector work harder before the heap grows
	// past what the tile buffers need; GOMEMLIMIT in the environment wins.
	if os.Getenv("GOMEMLIMIT") == "" {
		debug.SetMemoryLimit(192 << 20)
	}
	// Rank-k updates and projections go to OpenBLAS, one thread per
	// worker, so rounding does not depend on the machine's core count.
	openblas.Use()
	return raster.Init(raster.Config{CacheMB: 32})
}

// info prints a line of human text on stderr unless --quiet.
func (g *globals) info(format string, args ...any) {
	if !g.quiet {
		fmt.Fprintf(g.stderr, format+"\n", args...)
	}
}

// emit prints v as one line of JSON on stdout when --json is set.
func (g *globals) emit(v any) error {
	if !g.json {
		return nil
	}
	b, err := json.Marshal(v)
	if err != nil {
		return err
	}
	_, err = fmt.Fprintf(g.stdout, "%s\n", b)
	return err
}
