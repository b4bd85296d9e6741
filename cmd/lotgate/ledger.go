package main

import (
	"errors"
	"fmt"
	"io"

	"lotgate/pipeline/watch"
)

const ledgerHelp = `Usage: lotgate ledger verify OUTDIR

Checks the ledger a watcher keeps in OUTDIR/ledger.jsonl: that every line is
intact and the chain of sequence numbers and hashes is unbroken (an edited,
removed, inserted or reordered line is found), that the entries describe a
valid history, that every document the ledger names exists with its SHA-256
and every record names the ledger entry it was made under, that every
archived input still has the digest it was received with, that every
quarantined file has its reason, and that no content was certified twice.

Prints each problem on its own line, then a summary with the ledger's head
(SEQ:HASH): note it down to check later that nothing was rewritten since.

Exit status: 0 verified; 1 problems found; 2 usage error or the ledger
cannot be read.
`

func cmdLedger(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("ledger", ledgerHelp, stdout)
	rest, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "ledger", err)
	}
	switch {
	case len(rest) == 0:
		return usageError(stderr, "ledger", errors.New("no subcommand: give verify OUTDIR"))
	case rest[0] != "verify":
		return usageError(stderr, "ledger", fmt.Errorf("unknown subcommand %q; the subcommand is verify", rest[0]))
	case len(rest) != 2:
		return usageError(stderr, "ledger", errors.New("give one folder: lotgate ledger verify OUTDIR"))
	}
	r, err := watch.Verify(rest[1])
	if err != nil {
		fmt.Fprintf(stderr, "lotgate ledger: %v\n", err)
		return exitUsage
	}
	for _, p := range r.Problems {
		fmt.Fprintln(stdout, "BROKEN:", p)
	}
	verdict := "verified"
	if len(r.Problems) > 0 {
		verdict = fmt.Sprintf("%d problems", len(r.Problems))
	}
	fmt.Fprintf(stdout, "%s: %d entries, head %s; %d items: %d certified, %d duplicates, %d quarantined, %d withdrawn, %d lost, %d unfinished; %d documents and %d archived inputs checked: %s\n",
		rest[1], r.Entries, r.Head, r.Items, r.Certified, r.Duplicates, r.Quarantined, r.Withdrawn, r.Lost, r.Unfinished,
		r.OutputsChecked, r.InputsChecked, verdict)
	if len(r.Problems) > 0 {
		return exitVerdict
	}
	return exitOK
}
