package main

import (
	"errors"
	"fmt"
	"io"

	"lotgate/pipeline"
	"lotgate/pipeline/bundle"
	"lotgate/reports"
)

const freezeHelp = `Usage: lotgate freeze PIPELINE -o FILE [--replace]

Freezes a pipeline version into one bundle file (by convention FILE ends in
.lotgate): the pipeline, every file it names (a logo …) and a manifest with
the SHA-256 of each file, the pipeline's name and revision, the lotgate
version and the freeze time (SOURCE_DATE_EPOCH when set). The bundle's own
SHA-256 names it: run and replay accept the bundle wherever they accept a
pipeline, and every record made from it carries that digest. The same files
frozen at the same SOURCE_DATE_EPOCH give the same bytes.

Exit status: 0 frozen; 2 usage or pipeline error; 3 the bundle could not be
written.

Flags:
`

func cmdFreeze(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("freeze", freezeHelp, stdout)
	var out string
	fs.StringVar(&out, "o", "", "bundle file to write")
	fs.StringVar(&out, "out", "", "same as -o")
	replace := fs.Bool("replace", false, "overwrite an existing bundle whose content differs")
	pos, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "freeze", err)
	}
	switch {
	case len(pos) != 1:
		return usageError(stderr, "freeze", errors.New("give exactly one pipeline file"))
	case out == "":
		return usageError(stderr, "freeze", errors.New("no bundle file: give -o FILE"))
	}
	at, err := pipeline.RunTime()
	if err != nil {
		return usageError(stderr, "freeze", err)
	}
	data, err := bundle.Freeze(pos[0], at)
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	b, err := bundle.Read(data, out)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate freeze: %v\n", err)
		return exitUsage
	}
	changed, err := reports.WriteAtomic(out, data, *replace)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate freeze: %v\n", err)
		return exitFileFail
	}
	note := ""
	if !changed {
		note = " (unchanged)"
	}
	m := b.Manifest
	fmt.Fprintf(stdout, "froze pipeline %q revision %d (%d files) into %s%s\nbundle sha256 %s\n",
		m.Pipeline.Name, m.Pipeline.Revision, len(m.Files), out, note, b.Digest)
	return exitOK
}
