package cli

import (
	"bandfold/cmd/bandfold/internal/jobkit"
	"errors"
	"fmt"
	"strconv"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
)

// StrictCommands makes unknown subcommands and help topics usage errors
// (exit 2): cobra prints the parent's help and exits 0 for "survey drwa" and
// "completion tcsh", and its own help command does the same for "help
// fodl". Every command that only groups subcommands (the root, survey,
// completion) then prints its help when given no argument and refuses any
// other argument; "help TOPIC" refuses a topic that names no command. Call
// it on the finished root command.
func StrictCommands(root *cobra.Command) {
	root.InitDefaultCompletionCmd()
	root.SetHelpCommand(helpCommand())
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		if c.HasSubCommands() && !c.Runnable() {
			c.Args = unknownSubcommand
			c.RunE = func(c *cobra.Command, _ []string) error { return c.Help() }
		}
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(root)
	root.SetFlagErrorFunc(flagError)
}

// flagError turns pflag's refusal of a flag value ("invalid argument "x"
// for "--stride" flag: strconv.ParseInt: parsing "x": invalid syntax")
// into the user's words: `--stride "x": want a whole number`.
func flagError(_ *cobra.Command, err error) error {
	var ive *pflag.InvalidValueError
	if !errors.As(err, &ive) {
		return err
	}
	want := "not a valid value"
	switch ive.GetFlag().Value.Type() {
	case "int", "int8", "int16", "int32", "int64", "intSlice", "int32Slice", "int64Slice":
		want = "want a whole number"
	case "uint", "uint8", "uint16", "uint32", "uint64", "uintSlice":
		want = "want a whole number, 0 or more"
	case "float32", "float64", "float32Slice", "float64Slice":
		want = "want a number"
	case "bool", "boolSlice":
		want = "want true or false"
	case "duration", "durationSlice":
		want = `want a duration such as "90s" or "5m"`
	}
	if errors.Is(err, strconv.ErrRange) {
		want = "out of range"
	}
	return &jobkit.UsageError{Err: fmt.Errorf("--%s %q: %s", ive.GetFlag().Name, ive.GetValue(), want)}
}

// unknownSubcommand refuses the arguments of a command that only groups
// subcommands: the first one names no subcommand.
func unknownSubcommand(c *cobra.Command, args []string) error {
	if len(args) == 0 {
		return nil
	}
	return jobkit.Usagef("unknown command %q for %q%s", args[0], c.CommandPath(), suggest(c, args[0]))
}

// suggest returns " (did you mean X?)" for the subcommands of c close to
// name, "" when there are none.
func suggest(c *cobra.Command, name string) string {
	if c.SuggestionsMinimumDistance <= 0 {
		c.SuggestionsMinimumDistance = 2 // cobra's default, set only by its own lookup
	}
	if s := c.SuggestionsFor(name); len(s) > 0 {
		if n := len(s); n > 1 {
			return fmt.Sprintf(" (did you mean %s or %s?)", strings.Join(s[:n-1], ", "), s[n-1])
		}
		return fmt.Sprintf(" (did you mean %s?)", s[0])
	}
	return ""
}

// helpCommand is cobra's "help [command]" with an unknown topic refused.
func helpCommand() *cobra.Command {
	return &cobra.Command{
		Use:   "help [command]",
		Short: "Help about any command",
		Long:  "Help provides help for any command in the application.\nSimply type bandfold help [path to command] for full details.",
		RunE: func(c *cobra.Command, args []string) error {
			cmd, rest, err := c.Root().Find(args)
			if cmd == nil || err != nil || len(rest) > 0 {
				parent := c.Root()
				if cmd != nil {
					parent = cmd
				}
				return jobkit.Usagef("unknown help topic %q%s", strings.Join(args, " "), suggest(parent, args[len(args)-1]))
			}
			cmd.InitDefaultHelpFlag()
			cmd.InitDefaultVersionFlag()
			return cmd.Help()
		},
	}
}

// OneLine turns a multi-line error message (cobra's "unknown command"
// with its suggestions) into one line: lines trimmed of spaces and tabs,
// blank ones dropped, the rest joined with "; ".
func OneLine(msg string) string {
	var keep []string
	for _, l := range strings.Split(msg, "\n") {
		if l = strings.TrimSpace(l); l != "" {
			keep = append(keep, l)
		}
	}
	return strings.Join(keep, "; ")
}

// JSONRequested reports whether args ask for --json before any "--": for
// errors found before the flags were parsed.
func JSONRequested(args []string) bool {
	for _, a := range args {
		if a == "--" {
			return false
		}
		name, value, hasValue := strings.Cut(a, "=")
		if name != "--json" {
			continue
		}
		if !hasValue {
			return true
		}
		on, err := strconv.ParseBool(value)
		return err == nil && on
	}
	return false
}
