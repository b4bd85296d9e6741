package watch

import (
	"encoding/json"
	"fmt"
	"slices"
	"sync"

	"lotgate/pipeline/ledger"
)

// Ledger events. An item (one file taken from the inbox) passes through
//
//	received → claimed → computed → reported → archived
//
// or leaves that path as a duplicate (→ archived), a rejection
// (→ quarantined), a withdrawal (the file left the inbox before it was
// claimed) or a loss (its file vanished from the work folder). A file whose
// content changes after it was taken gets a changed entry with its new
// digest before it is computed.
const (
	EvStart           = "start"
	EvStop            = "stop"
	EvPipelineChanged = "pipeline-changed"
	EvReceived        = "received"
	EvClaimed         = "claimed"
	EvChanged         = "changed"
	EvDuplicate       = "duplicate"
	EvComputed        = "computed"
	EvReported        = "reported"
	EvArchived        = "archived"
	EvRejected        = "rejected"
	EvQuarantined     = "quarantined"
	EvWithdrawn       = "withdrawn"
	EvLost            = "lost"
)

// next lists the events allowed after each state of an item; states
// missing here are final.
var next = map[string][]string{
	EvReceived:  {EvClaimed, EvWithdrawn},
	EvClaimed:   {EvChanged, EvDuplicate, EvComputed, EvRejected, EvLost},
	EvChanged:   {EvChanged, EvDuplicate, EvComputed, EvRejected, EvLost},
	EvComputed:  {EvComputed, EvChanged, EvReported, EvLost},
	EvReported:  {EvArchived, EvLost},
	EvDuplicate: {EvArchived, EvLost},
	EvRejected:  {EvQuarantined, EvLost},
}

// Entry is the payload of one ledger line (the ledger adds seq, prev and
// hash). The item of a received entry is its own sequence number; every
// later entry about that file names it in Item.
type Entry struct {
	Time  string `json:"time"`
	Event string `json:"event"`
	Item  int64  `json:"item,omitempty"`
	// File is the name the file had in the inbox.
	File string `json:"file,omitempty"`
	// Size and SHA256 describe the file's content (received, changed).
	Size   *int64 `json:"size,omitempty"`
	SHA256 string `json:"sha256,omitempty"`
	// Link is the target of a symbolic link found in the inbox.
	Link string `json:"link,omitempty"`
	// Name is the item's file name in the work, archive and quarantine
	// folders: "ITEM-FILE".
	Name string `json:"name,omitempty"`
	// ProcessedAt is the time written into the item's record (claimed).
	ProcessedAt string `json:"processed_at,omitempty"`
	// Of is the item whose content a duplicate repeats.
	Of int64 `json:"of,omitempty"`
	// Verdict and LedgerHead are the record's (computed).
	Verdict    string `json:"verdict,omitempty"`
	LedgerHead string `json:"ledger_head,omitempty"`
	// Outputs are the documents written, in the output folder (reported).
	Outputs []Output `json:"outputs,omitempty"`
	// Reason says why a file was rejected, withdrawn or lost, or what
	// changed (pipeline-changed).
	Reason string `json:"reason,omitempty"`
	// Start entries describe the watcher.
	Tool     string        `json:"tool,omitempty"`
	PID      int           `json:"pid,omitempty"`
	Pipeline *PipelineInfo `json:"pipeline,omitempty"`
	Folders  *Folders      `json:"folders,omitempty"`
	Settings *Settings     `json:"settings,omitempty"`
	// Counts close a session (stop).
	Counts *Counts `json:"counts,omitempty"`
}

// Output is one document written for an item.
type Output struct {
	Format string `json:"format"`
	// File is the document's name in the output folder.
	File   string `json:"file"`
	SHA256 string `json:"sha256"`
}

// PipelineInfo names the pipeline a watcher runs.
type PipelineInfo struct {
	File   string `json:"file"`
	SHA256 string `json:"sha256"`
	Bundle string `json:"bundle_sha256,omitempty"`
}

// Folders are the watcher's folders, relative to the output folder when
// inside it.
type Folders struct {
	Inbox      string `json:"inbox"`
	Work       string `json:"work"`
	Archive    string `json:"archive"`
	Quarantine string `json:"quarantine"`
}

// Settings are the watcher's timing and concurrency settings.
type Settings struct {
	Workers         int    `json:"workers"`
	Settle          string `json:"settle"`
	Rescan          string `json:"rescan"`
	IncompleteAfter string `json:"incomplete_after"`
	Poll            bool   `json:"poll"`
}

// Counts tally what a session finished.
type Counts struct {
	// Certified items were reported and archived; Passed of them had the
	// verdict pass.
	Certified   int `json:"certified"`
	Passed      int `json:"passed"`
	Quarantined int `json:"quarantined"`
	Duplicates  int `json:"duplicates"`
	Withdrawn   int `json:"withdrawn"`
	Lost        int `json:"lost"`
	// Unfinished items were open when the session ended.
	Unfinished int `json:"unfinished"`
}

// item is the ledger's view of one file.
type item struct {
	id          int64
	file        string
	size        int64
	sha         string
	link        string
	name        string
	state       string
	processedAt string
	head        string // the entry the record is made under: claimed or the last changed
	verdict     string
	of          int64
	reason      string
	outputs     []Output
}

// state is what the ledger says, rebuilt by replaying it and kept up to
// date by every append (in ledger order).
type state struct {
	mu     sync.Mutex
	items  map[int64]*item
	open   map[int64]*item
	owner  map[string]int64 // content digest → the item that owns it
	busy   map[int64]bool   // items a worker is on
	start  *Entry           // the last start entry
	counts Counts           // this session
}

func newState() *state {
	return &state{items: map[int64]*item{}, open: map[int64]*item{}, owner: map[string]int64{}, busy: map[int64]bool{}}
}

// decode reads a ledger line's payload.
func decode(l ledger.Line) (*Entry, error) {
	var e Entry
	if err := json.Unmarshal(l.Raw, &e); err != nil {
		return nil, fmt.Errorf("line %d: %v", l.Number, err)
	}
	return &e, nil
}

// apply updates the state with one entry. live entries (appended by this
// session) are counted, and a received one marks its item busy.
func (s *state) apply(l ledger.Line, e *Entry, live bool) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	switch e.Event {
	case EvStart:
		s.start = e
		return nil
	case EvStop, EvPipelineChanged:
		return nil
	case EvReceived:
		it := &item{id: l.Seq, file: e.File, sha: e.SHA256, link: e.Link, state: EvReceived, name: itemName(l.Seq, e.File)}
		if e.Size != nil {
			it.size = *e.Size
		}
		s.items[it.id], s.open[it.id] = it, it
		if live {
			s.busy[it.id] = true
		}
		return nil
	}
	it := s.items[e.Item]
	if it == nil {
		return fmt.Errorf("line %d: %s entry for item %d, which was never received", l.Number, e.Event, e.Item)
	}
	if !slices.Contains(next[it.state], e.Event) {
		return fmt.Errorf("line %d: item %d (%s) is %s; %s cannot follow", l.Number, it.id, it.file, it.state, e.Event)
	}
	if live {
		s.tally(it, e)
	}
	it.state = e.Event
	switch e.Event {
	case EvClaimed:
		it.processedAt, it.head = e.ProcessedAt, l.Head()
		s.own(it)
	case EvChanged:
		s.disown(it)
		it.sha, it.head = e.SHA256, l.Head()
		if e.Size != nil {
			it.size = *e.Size
		}
		s.own(it)
	case EvDuplicate:
		it.of = e.Of
	case EvComputed:
		it.verdict = e.Verdict
	case EvReported:
		it.outputs = e.Outputs
	case EvRejected:
		it.reason = e.Reason
		s.disown(it)
	case EvWithdrawn, EvLost:
		it.reason = e.Reason
		s.disown(it)
	}
	if next[it.state] == nil {
		delete(s.open, it.id)
	}
	return nil
}

func (s *state) tally(it *item, e *Entry) {
	c := &s.counts
	switch {
	case e.Event == EvArchived && it.state == EvReported:
		c.Certified++
		if it.verdict == "pass" {
			c.Passed++
		}
	case e.Event == EvArchived:
		c.Duplicates++
	case e.Event == EvQuarantined:
		c.Quarantined++
	case e.Event == EvWithdrawn:
		c.Withdrawn++
	case e.Event == EvLost:
		c.Lost++
	}
}

// own makes it the owner of its digest unless another item owns it.
func (s *state) own(it *item) {
	if it.sha == "" {
		return
	}
	if _, taken := s.owner[it.sha]; !taken {
		s.owner[it.sha] = it.id
	}
}

func (s *state) disown(it *item) {
	if s.owner[it.sha] == it.id {
		delete(s.owner, it.sha)
	}
}

// get returns a copy of an item.
func (s *state) get(id int64) item {
	s.mu.Lock()
	defer s.mu.Unlock()
	return *s.items[id]
}

// duplicateOf returns the item that owns it's content, when that is
// another item.
func (s *state) duplicateOf(it item) int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	if o, ok := s.owner[it.sha]; ok && o != it.id {
		return o
	}
	return 0
}

// idle marks an item no longer worked on.
func (s *state) idle(id int64) {
	s.mu.Lock()
	delete(s.busy, id)
	s.mu.Unlock()
}

// claimOpen returns the open items no worker is on, oldest first, and
// marks them busy.
func (s *state) claimOpen() []int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	var ids []int64
	for id := range s.open {
		if !s.busy[id] {
			ids = append(ids, id)
		}
	}
	slices.Sort(ids)
	for _, id := range ids {
		s.busy[id] = true
	}
	return ids
}

// snapshot returns the session counts with the open items counted.
func (s *state) snapshot() (Counts, int) {
	s.mu.Lock()
	defer s.mu.Unlock()
	c := s.counts
	c.Unfinished = len(s.open)
	return c, len(s.busy)
}
