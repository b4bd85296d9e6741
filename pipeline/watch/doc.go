// Package watch processes the data files dropped into a folder (the inbox)
// exactly once, across crashes, and keeps a tamper-evident ledger of what it
// did (see package ledger for the line format).
//
// # Taking a file
//
// Candidates come from file-system events (fsnotify) and from full
// listings of the inbox: at start, every rescan interval, and at once when
// the event source reports an error such as a queue overflow. Events are
// only hints; the listing reconciled with the ledger is the truth. A file
// is taken when its size, modification time, type and identity have not
// changed over at least three checks spanning the settle time, it can be
// opened, and it looks complete (not empty, a line end after its last
// line); a settled file that still looks unfinished is taken after
// IncompleteAfter, to be processed or quarantined. Hidden, backup and
// temporary names are left alone until renamed.
//
// # States
//
// Each state change is appended to the ledger and synced before the work it
// allows is done:
//
//	received   the file was found settled: name, size, SHA-256
//	claimed    it was renamed out of the inbox into the work folder as
//	           ITEM-NAME (ITEM is the received entry's sequence number);
//	           the record's time is fixed here
//	computed   the pipeline ran: verdict, and the ledger head the record
//	           names (the claimed entry, or the last changed entry)
//	reported   every document was written atomically: names and SHA-256
//	archived   the input was moved to the archive folder
//
// with the side paths duplicate (the content was claimed before) →
// archived, rejected (reason) → quarantined (the file and
// ITEM-NAME.reason.txt), withdrawn (the file left the inbox before it was
// claimed) and lost (the claimed file vanished). changed records a claimed
// file whose writer was still at work: its new size and digest, once it
// has settled again in the work folder.
//
// # Recovery
//
// On start the ledger is replayed; every item not in a final state is
// finished from where it stands, by looking at where its file is now: a
// received item whose file is in the work folder is claimed, otherwise
// withdrawn (and a file still in the inbox is taken again as a new item);
// claimed and computed items are computed again (the record's time and
// ledger head come from the ledger, and documents are named from the input
// and pipeline digests, so a redo writes the same bytes, and an existing
// complete document is left as it is); reported and duplicate items are
// archived, rejected ones quarantined, each move finished if a crash
// interrupted it. The same open items are retried at every rescan, so a
// transient failure (a full disk) does not need a restart. A torn last
// ledger line is set aside; any other damage to the ledger, and an empty
// ledger beside folders that hold files, make New refuse to start.
package watch
