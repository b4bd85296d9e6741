package watch

import (
	"strings"
	"testing"

	"lotgate/pipeline/ledger"
)

// replay applies a history to a fresh state; each step is EVENT or
// EVENT:ITEM (received entries start the item numbered by their line).
func replay(events []Entry) (*state, error) {
	s := newState()
	for i := range events {
		l := ledger.Line{Seq: int64(i + 1), Hash: strings.Repeat("a", 64), Number: i + 1}
		if err := s.apply(l, &events[i], false); err != nil {
			return s, err
		}
	}
	return s, nil
}

func size(n int64) *int64 { return &n }

// The state machine of an item: the paths the package documents are
// accepted, anything else is refused with the line it happens at.
func TestStateTransitions(t *testing.T) {
	recv := func(sha string) Entry { return Entry{Event: EvReceived, File: "a.csv", Size: size(10), SHA256: sha} }
	ev := func(event string, item int64) Entry { return Entry{Event: event, Item: item} }
	cases := []struct {
		name    string
		history []Entry
		want    string // "" = valid
		state   string // of item 1
	}{
		{"certified", []Entry{recv("x"), ev(EvClaimed, 1), ev(EvComputed, 1), ev(EvReported, 1), ev(EvArchived, 1)}, "", EvArchived},
		{"rejected", []Entry{recv("x"), ev(EvClaimed, 1), ev(EvRejected, 1), ev(EvQuarantined, 1)}, "", EvQuarantined},
		{"withdrawn", []Entry{recv("x"), ev(EvWithdrawn, 1)}, "", EvWithdrawn},
		{"changed then computed", []Entry{recv("x"), ev(EvClaimed, 1), {Event: EvChanged, Item: 1, SHA256: "y"}, ev(EvComputed, 1)}, "", EvComputed},
		{"computed twice", []Entry{recv("x"), ev(EvClaimed, 1), ev(EvComputed, 1), ev(EvComputed, 1)}, "", EvComputed},
		{"reported before computed", []Entry{recv("x"), ev(EvClaimed, 1), ev(EvReported, 1)}, "line 3: item 1 (a.csv) is claimed; reported cannot follow", ""},
		{"computed before claimed", []Entry{recv("x"), ev(EvComputed, 1)}, "line 2: item 1 (a.csv) is received; computed cannot follow", ""},
		{"after the end", []Entry{recv("x"), ev(EvWithdrawn, 1), ev(EvClaimed, 1)}, "withdrawn; claimed cannot follow", ""},
		{"unknown item", []Entry{recv("x"), ev(EvClaimed, 5)}, "line 2: claimed entry for item 5, which was never received", ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := replay(c.history)
			if c.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				if got := s.items[1].state; got != c.state {
					t.Errorf("state %s, want %s", got, c.state)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want %q", err, c.want)
			}
		})
	}
}

// The first item claimed with a content owns it; a later one with the same
// content is a duplicate of it, until the owner is rejected.
func TestDuplicateOwner(t *testing.T) {
	recv := func(sha string) Entry { return Entry{Event: EvReceived, File: "f", Size: size(1), SHA256: sha} }
	s, err := replay([]Entry{
		recv("x"), recv("x"), recv("y"), // items 1, 2, 3
		{Event: EvClaimed, Item: 2}, {Event: EvClaimed, Item: 1}, {Event: EvClaimed, Item: 3},
	})
	if err != nil {
		t.Fatal(err)
	}
	if d := s.duplicateOf(*s.items[1]); d != 2 {
		t.Errorf("item 1 is a duplicate of %d, want 2 (claimed first)", d)
	}
	if d := s.duplicateOf(*s.items[2]); d != 0 {
		t.Errorf("item 2 owns its content, yet is a duplicate of %d", d)
	}
	if d := s.duplicateOf(*s.items[3]); d != 0 {
		t.Errorf("item 3 has other content, yet is a duplicate of %d", d)
	}
	l := ledger.Line{Seq: 7, Number: 7}
	if err := s.apply(l, &Entry{Event: EvRejected, Item: 2, Reason: "bad"}, false); err != nil {
		t.Fatal(err)
	}
	if _, owned := s.owner["x"]; owned {
		t.Errorf("a rejected item still owns its content")
	}
	if n := len(s.open); n != 3 {
		t.Errorf("%d open items, want 3", n)
	}
}
