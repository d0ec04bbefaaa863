package events

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
)

// Schema is the value of the "schema" field of every event record.
const Schema = "shoal.event/1"

// Note is carried by every event record.
const Note = "a community is a structural pattern in the graph, not evidence of wrongdoing by its members"

// Type is the kind of a lifecycle event.
type Type string

// The event types, in output order.
const (
	Merge    Type = "merge"
	Split    Type = "split"
	Grow     Type = "grow"
	Shrink   Type = "shrink"
	Continue Type = "continue"
	Birth    Type = "birth"
	Death    Type = "death"
)

// Types lists the event types in output order.
var Types = [...]Type{Merge, Split, Grow, Shrink, Continue, Birth, Death}

// order is the position of t in Types.
func (t Type) order() int {
	switch t {
	case Merge:
		return 0
	case Split:
		return 1
	case Grow:
		return 2
	case Shrink:
		return 3
	case Continue:
		return 4
	case Birth:
		return 5
	case Death:
		return 6
	}
	return len(Types)
}

// Event is one lifecycle event between two snapshots. Its JSON form is the
// record described in doc.go ("Event record").
type Event struct {
	Schema       string    `json:"schema"`
	ID           string    `json:"id"`
	Type         Type      `json:"type"`
	Graph        string    `json:"graph"`
	FromSnapshot uint64    `json:"from_snapshot"`
	ToSnapshot   uint64    `json:"to_snapshot"`
	FromTime     string    `json:"from_time"`
	ToTime       string    `json:"to_time"`
	Before       []Side    `json:"before"`
	After        []Side    `json:"after"`
	Overlaps     []Overlap `json:"overlaps"`
	Joined       []string  `json:"joined"`
	JoinedCount  int       `json:"joined_count"`
	Left         []string  `json:"left"`
	LeftCount    int       `json:"left_count"`
	Note         string    `json:"note"`
}

// Side is one community before or after an event.
type Side struct {
	Community uint64 `json:"community"`
	Size      int    `json:"size"`
	Stats     Stats  `json:"stats"`
	// Members is set only with Options.Members.
	Members []string `json:"members,omitempty"`
	// Hubs are the hubs (the timeline's hub policy) the community's members
	// touch: kept out of the optimisation, so in no community, but named
	// here so that an alert shows what joins the group to the rest.
	Hubs []string `json:"hubs,omitempty"`
}

// Stats are the frozen statistics of a community (see package snapshot).
type Stats struct {
	Internal    float64 `json:"internal"`
	Degree      float64 `json:"degree"`
	Density     float64 `json:"density"`
	Conductance float64 `json:"conductance"`
	// Expected and Z compare Internal with the configuration model's
	// expectation for the community's degree (tracker.InternalZ): how
	// unusual the group would be if drawn blind. A screening figure for
	// ranking alerts, not a test: the optimiser chose the group because it
	// is dense (shoal detect --null calibrates it).
	Expected float64 `json:"expected"`
	Z        float64 `json:"z"`
}

// Overlap is the number of nodes a community of the earlier snapshot (From)
// shares with one of the later snapshot (To), and their Jaccard similarity
// shared / (|From| + |To| - shared).
type Overlap struct {
	From    uint64  `json:"from"`
	To      uint64  `json:"to"`
	Shared  int     `json:"shared"`
	Jaccard float64 `json:"jaccard"`
}

// eventID is the first 16 bytes of SHA-256 over the schema, graph, snapshot
// ids, type and the community ids before and after, in hex: the same event
// computed twice gets the same id (a de-duplication key for publishing).
func eventID(buf []byte, graph string, from, to uint64, typ Type, before, after []Side) (string, []byte) {
	buf = append(buf[:0], Schema...)
	buf = append(buf, 0)
	buf = binary.BigEndian.AppendUint64(buf, uint64(len(graph)))
	buf = append(buf, graph...)
	buf = binary.BigEndian.AppendUint64(buf, from)
	buf = binary.BigEndian.AppendUint64(buf, to)
	buf = append(buf, typ...)
	buf = append(buf, 0)
	buf = binary.BigEndian.AppendUint64(buf, uint64(len(before)))
	for i := range before {
		buf = binary.BigEndian.AppendUint64(buf, before[i].Community)
	}
	buf = binary.BigEndian.AppendUint64(buf, uint64(len(after)))
	for i := range after {
		buf = binary.BigEndian.AppendUint64(buf, after[i].Community)
	}
	sum := sha256.Sum256(buf)
	return hex.EncodeToString(sum[:16]), buf
}

// Marshal returns the JSON record of ev, without a trailing newline.
func Marshal(ev *Event) ([]byte, error) {
	b, err := json.Marshal(ev)
	if err != nil {
		return nil, fmt.Errorf("events: encode %s event %s: %w", ev.Type, ev.ID, err)
	}
	return b, nil
}

// Encode writes ev as one JSON line (the record and a newline) in a single
// Write call.
func Encode(w io.Writer, ev *Event) error {
	b, err := Marshal(ev)
	if err != nil {
		return err
	}
	if _, err := w.Write(append(b, '\n')); err != nil {
		return fmt.Errorf("events: write %s event %s: %w", ev.Type, ev.ID, err)
	}
	return nil
}
