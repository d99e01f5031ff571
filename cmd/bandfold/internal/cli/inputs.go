package cli

import (
	"fmt"
	"os"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
)

// Kinds of input a flag or the arguments name, for CheckInputs.
const (
	// InputFile is one file or folder.
	InputFile = "file"
	// InputImage is an image argument: a file, a comma-separated stack
	// of files, or a glob pattern (which the job expands).
	InputImage = "image"
	// InputMask is a mask rule, FILE[:bits=...|:values=...].
	InputMask = "mask"
)

// inputAnnotation marks the flags (and, on a command, the arguments) that
// name input files; its value is the kind.
const inputAnnotation = "bandfold_input"

// MarkInputs says that the named flags of fs name input files of the given
// kind.
func MarkInputs(fs *pflag.FlagSet, kind string, names ...string) {
	for _, n := range names {
		if err := fs.SetAnnotation(n, inputAnnotation, []string{kind}); err != nil {
			panic("cli: " + err.Error())
		}
	}
}

// MarkArgs says that the arguments of cmd name input files of the given
// kind.
func MarkArgs(cmd *cobra.Command, kind string) {
	if cmd.Annotations == nil {
		cmd.Annotations = map[string]string{}
	}
	cmd.Annotations[inputAnnotation] = kind
}

// CheckInputs applies the one rule for input files the user named (see
// output.ErrInput): every file named by a marked flag of cmd or, when
// marked, by its arguments must exist and be readable, or the command line
// is refused with a usage error naming the flag and the file. GDAL virtual
// paths are left to GDAL, and glob patterns that name no file to the job,
// which expands them.
func CheckInputs(cmd *cobra.Command, args []string) error {
	var err error
	cmd.Flags().Visit(func(f *pflag.Flag) {
		kind := f.Annotations[inputAnnotation]
		if err != nil || len(kind) == 0 {
			return
		}
		values := []string{f.Value.String()}
		if sv, ok := f.Value.(pflag.SliceValue); ok {
			values = sv.GetSlice()
		}
		for _, v := range values {
			if err == nil {
				err = checkInput("--"+f.Name+" ", kind[0], v)
			}
		}
	})
	if kind := cmd.Annotations[inputAnnotation]; kind != "" {
		for _, a := range args {
			if err == nil {
				err = checkInput("", kind, a)
			}
		}
	}
	return err
}

// checkInput checks the files of one value of the given kind; prefix names
// the flag in the error.
func checkInput(prefix, kind, value string) error {
	paths := []string{value}
	switch kind {
	case InputMask:
		r, err := raster.ParseMask(value)
		if err != nil {
			return nil // ParseMasks refuses it
		}
		paths = []string{r.Path}
	case InputImage:
		paths = jobkit.SplitStack(value)
	}
	for _, p := range paths {
		if p == "" || raster.IsVirtual(p) || raster.IsURL(p) {
			continue // GDAL's or a server's: read when the job opens it
		}
		p = raster.ItemFile(p)
		if kind == InputImage && strings.ContainsAny(p, "*?[") {
			if _, err := os.Stat(p); err != nil {
				continue // a pattern: the job expands it
			}
		}
		if err := output.CheckInput(p, nil); err != nil {
			return &jobkit.UsageError{Err: fmt.Errorf("%s%w", prefix, err)}
		}
	}
	return nil
}
