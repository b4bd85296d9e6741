package main

import (
	"errors"
	"flag"
	"fmt"
	"io"

	"lotgate/pipeline"
)

func versionString() string { return pipeline.Version }

// newFlags makes a flag set whose usage text is the command's help.
func newFlags(name, help string, stdout io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(stdout)
	fs.Usage = func() {
		fmt.Fprint(stdout, help)
		fs.PrintDefaults()
	}
	return fs
}

// parse parses flags that may stand before, between or after the positional
// arguments, and returns the positional ones. It returns errHelp when help was
// asked for (already printed).
func parse(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, errHelp
			}
			return nil, err
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		if args[0] == "--" {
			return append(pos, args[1:]...), nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

var errHelp = errors.New("help")

// usageError prints a flag problem and returns the usage exit status.
func usageError(stderr io.Writer, cmd string, err error) int {
	if errors.Is(err, errHelp) {
		return exitOK
	}
	fmt.Fprintf(stderr, "lotgate %s: %v (see lotgate %s --help)\n", cmd, err, cmd)
	return exitUsage
}

// stringFlag defines a flag with a short and a long name sharing one value.
func stringFlag(fs *flag.FlagSet, short, long, usage string) *string {
	v := new(string)
	fs.StringVar(v, short, "", usage)
	fs.StringVar(v, long, "", "same as -"+short)
	return v
}

// pipelineFlag is the -p/--pipeline flag every processing command takes.
func pipelineFlag(fs *flag.FlagSet) *string {
	return stringFlag(fs, "p", "pipeline", "pipeline file (.hcl) or frozen bundle (.lotgate)")
}
