package main

import (
	"errors"
	"fmt"
	"io"
)

const checkHelp = `Usage: lotgate check PIPELINE|BUNDLE...

Loads each pipeline and reports every mistake with its file, line, column and
the source around it. Prints a one-line summary of each valid pipeline.
Exit status 0 when all are valid, 2 otherwise.
`

func cmdCheck(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("check", checkHelp, stdout)
	files, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "check", err)
	}
	if len(files) == 0 {
		return usageError(stderr, "check", errors.New("no pipeline file given"))
	}
	status := exitOK
	for _, f := range files {
		p, err := loadPipeline(f)
		if err != nil {
			fmt.Fprintln(stderr, describe(err))
			status = exitUsage
			continue
		}
		fmt.Fprintf(stdout, "%s: ok: pipeline %q revision %d, %d steps, %d limits, sha256 %s\n",
			f, p.Name, p.Revision, len(p.Steps), len(p.Limits), p.Digest)
	}
	return status
}
