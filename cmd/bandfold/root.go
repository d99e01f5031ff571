package main

import (
	"cmp"
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
	"github.com/spf13/pflag"

	"bandfold/bands/openblas"
	"bandfold/cmd/bandfold/internal/cli"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
)

// version is the tool version recorded in every output; set at build time
// with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

// Exit codes.
const (
	exitOK      = 0
	exitFailure = 1 // runtime failure, including any failed scene of a batch
	exitUsage   = 2 // bad command line
)

// runContext is the context of the running command line, cancelled by
// SIGINT or SIGTERM; tests wait on it to interrupt a run deterministically.
var runContext context.Context

// globals holds the flags shared by every command and the streams commands
// write to.
type globals struct {
	json    bool
	quiet   bool
	verbose bool
	workers int
	stdout  io.Writer
	stderr  io.Writer
	// started is set when a command's own code begins: any error before
	// that comes from parsing the command line.
	started bool
	// command names the running command for progress lines ("learn",
	// "survey draw").
	command string
}

func run(args []string, stdout, stderr io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	runContext = ctx
	g := &globals{stdout: stdout, stderr: stderr}
	root := newRootCommand(g)
	root.SetArgs(args)
	root.SetOut(stdout)
	root.SetErr(stderr)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return exitOK
	}
	code := exitFailure
	if !g.started || jobkit.IsUsage(err) {
		code = exitUsage
	}
	msg := cli.OneLine(err.Error())
	switch {
	case errors.Is(err, context.Canceled):
		msg = "interrupted; partial outputs removed"
	case errors.Is(err, jobkit.ErrBatchFailed):
		msg = "" // every failed scene was reported on its own line
	}
	if msg != "" {
		fmt.Fprintf(stderr, "bandfold: %s\n", msg)
	}
	if g.json || !g.started && cli.JSONRequested(args) {
		if msg == "" {
			msg = err.Error()
		}
		b, _ := headed("bandfold-error", map[string]any{"error": msg, "exit_code": code})
		fmt.Fprintf(stdout, "%s\n", b)
	}
	return code
}

func newRootCommand(g *globals) *cobra.Command {
	root := &cobra.Command{
		Use:   "bandfold",
		Short: "Principal components, compression and change maps for multiband imagery",
		Long:  cli.RootHelp,
		Example: `  bandfold demo --dir demo-out
  bandfold learn scene.tif --out scene.basis.json
  bandfold fold scene.tif --basis scene.basis.json --out scene.components.tif`,
		Version:       version,
		SilenceErrors: true,
		SilenceUsage:  true,
	}
	// The BLAS kernel decides the arithmetic's speed: benchmarks print it.
	root.SetVersionTemplate("bandfold {{.Version}} (OpenBLAS kernel " + cmp.Or(openblas.CoreName(), "none: gonum") + ")\n")
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
		newDenoiseCommand(g),
		newChangeCommand(g), newTimelineCommand(g),
		newInspectCommand(g),
		newDemoCommand(g),
		newSurveyCommand(g),
	)
	cli.StrictCommands(root)
	addOutputsHelp(root)
	return root
}

// addOutputsHelp ends every command's help with the files it writes
// (cli.Outputs).
func addOutputsHelp(c *cobra.Command) {
	if help := cli.OutputsHelp(strings.TrimPrefix(c.CommandPath(), c.Root().Name()+" ")); help != "" {
		c.Long += help
	}
	for _, sub := range c.Commands() {
		addOutputsHelp(sub)
	}
}

// runE wraps a command's work: it marks the command line as parsed, sets up
// the process (memory limit, BLAS threads, GDAL) and builds the job
// environment.
func (g *globals) runE(work func(ctx context.Context, env jobkit.Env, args []string) error) func(*cobra.Command, []string) error {
	return func(cmd *cobra.Command, args []string) error {
		g.started = true
		g.command = strings.TrimPrefix(cmd.CommandPath(), cmd.Root().Name()+" ")
		if g.workers < 1 {
			return jobkit.Usagef("--workers %d: need at least 1", g.workers)
		}
		if err := cli.CheckInputs(cmd, args); err != nil {
			return err
		}
		// A soft limit makes the collector work harder before the heap
		// grows past what the tile buffers need; GOMEMLIMIT in the
		// environment wins.
		if os.Getenv("GOMEMLIMIT") == "" {
			debug.SetMemoryLimit(192 << 20)
		}
		// Rank-k updates and projections go to OpenBLAS, one thread per
		// worker, so rounding does not depend on the machine's core count.
		openblas.Use()
		env := g.env()
		if err := raster.Init(raster.Config{CacheMB: 32, Log: env.Log}); err != nil {
			return err
		}
		return work(cmd.Context(), env, args)
	}
}

// env is the job environment of a command.
func (g *globals) env() jobkit.Env {
	level := slog.LevelWarn
	switch {
	case g.verbose:
		level = slog.LevelDebug
	case g.quiet:
		level = slog.LevelError
	}
	return jobkit.Env{Workers: g.workers, Version: version, Progress: g.passProgress,
		Log: slog.New(&cli.LineHandler{W: g.stderr, Level: level, Details: g.verbose})}
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
	b, err := headed("bandfold-"+strings.ReplaceAll(g.command, " ", "-")+"-result", v)
	if err != nil {
		return err
	}
	_, err = fmt.Fprintf(g.stdout, "%s\n", b)
	return err
}

// headed marshals v, a JSON object, with "format" and "version" first
// (jobkit.Document) unless it carries them already.
func headed(format string, v any) ([]byte, error) {
	b, err := json.Marshal(v)
	if err != nil || len(b) < 2 || b[0] != '{' {
		return b, err
	}
	var head struct {
		Format *string `json:"format"`
	}
	if json.Unmarshal(b, &head) == nil && head.Format != nil {
		return b, nil
	}
	h, err := json.Marshal(jobkit.Doc(format))
	if err != nil {
		return nil, err
	}
	if string(b) == "{}" {
		return h, nil
	}
	return append(append(h[:len(h)-1:len(h)-1], ','), b[1:]...), nil
}

// args wraps a cobra argument check so that its error is a usage error.
func args(check cobra.PositionalArgs) cobra.PositionalArgs {
	return func(cmd *cobra.Command, a []string) error {
		if err := check(cmd, a); err != nil {
			return &jobkit.UsageError{Err: err}
		}
		return nil
	}
}

// usagef is job.Usagef, for flag translation.
var usagef = jobkit.Usagef

// inputFlags are the input flags of a command (see cli.InputFlags).
type inputFlags struct{ cli.InputFlags }

func (f *inputFlags) register(fs *pflag.FlagSet, align bool) { f.Register(fs, align) }
func (f *inputFlags) input() (jobkit.Input, error)           { return f.Input() }
func (f *inputFlags) scenes(args []string) []string          { return f.Scenes(args) }

var (
	parseMasks           = cli.ParseMasks
	checkCreationOptions = cli.CheckCreationOptions
)
