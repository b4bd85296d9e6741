package main

import (
	"errors"
	"fmt"
	"io"

	"lotgate/pipeline/bundle"
	"lotgate/pipeline/replay"
)

const diffHelp = `Usage: lotgate diff BUNDLE_A BUNDLE_B

Lists the parameter differences between two pipeline versions, step by step
and limit by limit: every setting as written in each block (a setting written
on one side only shows "(absent)": the default applies there), the order of
the steps, and the SHA-256 of the files they name. Comments and layout are
no difference. Either side may also be a plain pipeline file.

Exit status: 0 no parameter differs; 1 some differ; 2 usage or bundle error.

Flags:
`

func cmdDiff(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("diff", diffHelp, stdout)
	pos, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "diff", err)
	}
	if len(pos) != 2 {
		return usageError(stderr, "diff", errors.New("give two bundles (or pipeline files)"))
	}
	var sides [2]*bundle.Bundle
	for i, path := range pos {
		if sides[i], err = bundle.OpenAny(path); err != nil {
			fmt.Fprintln(stderr, describe(err))
			return exitUsage
		}
	}
	changes, err := replay.DiffPipelines(sides[0], sides[1])
	if err != nil {
		fmt.Fprintf(stderr, "lotgate diff: %v\n", err)
		return exitUsage
	}
	fmt.Fprintf(stdout, "A: %s\nB: %s\n\n", describeBundle(sides[0]), describeBundle(sides[1]))
	if len(changes) == 0 {
		if sides[0].Pipeline.Digest != sides[1].Pipeline.Digest {
			fmt.Fprintln(stdout, "no parameter differs; the pipeline files differ only in comments or layout")
		} else {
			fmt.Fprintln(stdout, "no parameter differs: the pipeline files are identical")
		}
		return exitOK
	}
	if err := replay.WriteChanges(stdout, changes); err != nil {
		fmt.Fprintf(stderr, "lotgate diff: %v\n", err)
		return exitUsage
	}
	fmt.Fprintf(stdout, "\n%d settings differ\n", len(changes))
	return exitVerdict
}
