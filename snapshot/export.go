package snapshot

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"
)

// Note is the reminder carried by every export: a community is structure,
// not evidence of wrongdoing.
const Note = "a community is a structural pattern in the graph, not evidence of wrongdoing by its members"

// JSONSchema is the schema tag of the JSON-lines export.
const JSONSchema = "shoal.snapshot/1"

// NameFunc turns a dense internal node id into the external id to print.
// nil means the decimal internal id.
type NameFunc func(node uint32) string

func (f NameFunc) name(v uint32) string {
	if f == nil {
		return strconv.FormatUint(uint64(v), 10)
	}
	return f(v)
}

// tsvEscaper keeps one member per line whatever the external ids contain.
var tsvEscaper = strings.NewReplacer(`\`, `\\`, "\t", `\t`, "\n", `\n`, "\r", `\r`)

// RFC3339 formats a Unix-millisecond time as RFC 3339 in UTC.
func RFC3339(ms int64) string {
	return time.UnixMilli(ms).UTC().Format(time.RFC3339Nano)
}

// WriteTSV writes s as comment lines (starting with '#': the header, the
// note, the column names) followed by one "community<TAB>node" line per
// member, communities in id order and members in internal id order. name
// maps internal ids to external ones (nil: decimal internal ids); a
// backslash, tab, newline or carriage return in a name is written as \\, \t,
// \n or \r.
func WriteTSV(w io.Writer, s *Snapshot, name func(uint32) string) error {
	bw := bufio.NewWriter(w)
	nf := NameFunc(name)
	fmt.Fprintf(bw, "# shoal snapshot %d of graph %q: %d nodes, %d edges, %d communities, modularity %g (gamma %g), watermark %s, seq %d\n",
		s.ID, s.Graph, s.Nodes, s.Edges, len(s.Communities), s.Modularity, s.Gamma, RFC3339(s.Watermark), s.Seq)
	fmt.Fprintf(bw, "# note: %s\n", Note)
	bw.WriteString("# community\tnode\n")
	var line []byte
	for i := range s.Communities {
		c := &s.Communities[i]
		for _, v := range c.Members {
			line = strconv.AppendUint(line[:0], c.ID, 10)
			line = append(line, '\t')
			line = append(line, tsvEscaper.Replace(nf.name(v))...)
			line = append(line, '\n')
			bw.Write(line)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("snapshot: write tsv %d: %w", s.ID, err)
	}
	return nil
}

// HeaderJSON is the header line of the JSON-lines export (schema
// JSONSchema, kind "header"); shoal replay's --snapshots-out lines extend it.
type HeaderJSON struct {
	Schema      string  `json:"schema"`
	Kind        string  `json:"kind"`
	ID          uint64  `json:"id"`
	Graph       string  `json:"graph"`
	Seq         uint64  `json:"seq"`
	Watermark   string  `json:"watermark"`
	WatermarkMs int64   `json:"watermark_ms"`
	Time        string  `json:"time"`
	Modularity  float64 `json:"modularity"`
	Gamma       float64 `json:"gamma"`
	Objective   string  `json:"objective"`
	Quality     float64 `json:"quality"`
	TotalWeight float64 `json:"total_weight"`
	Nodes       int     `json:"nodes"`
	Edges       int     `json:"edges"`
	Communities int     `json:"communities"`
	Note        string  `json:"note"`
}

// JSON returns the header line of the JSON-lines export for h.
func (h *Header) JSON() HeaderJSON {
	return HeaderJSON{
		Schema: JSONSchema, Kind: "header", ID: h.ID, Graph: h.Graph, Seq: h.Seq,
		Watermark: RFC3339(h.Watermark), WatermarkMs: h.Watermark, Time: RFC3339(h.Time),
		Modularity: h.Modularity, Gamma: h.Gamma, Objective: h.Objective.String(), Quality: h.Quality, TotalWeight: h.TotalWeight,
		Nodes: h.Nodes, Edges: h.Edges, Communities: h.Communities, Note: Note,
	}
}

// HeaderJSON returns the snapshot's header line of the JSON-lines export,
// counting the communities it holds.
func (s *Snapshot) HeaderJSON() HeaderJSON {
	j := s.Header.JSON()
	j.Communities = len(s.Communities)
	return j
}

type jsonCommunity struct {
	Kind        string   `json:"kind"`
	Community   uint64   `json:"community"`
	Size        int      `json:"size"`
	Internal    float64  `json:"internal"`
	Degree      float64  `json:"degree"`
	Density     float64  `json:"density"`
	Conductance float64  `json:"conductance"`
	Expected    float64  `json:"expected"`
	Z           float64  `json:"z"`
	Members     []string `json:"members"`
	// Hubs are the hubs adjacent to a member (external ids), absent
	// without a hub policy.
	Hubs []string `json:"hubs,omitempty"`
}

// WriteJSONL writes s as JSON lines: one object with "kind":"header" (schema
// [JSONSchema], the header fields, times in RFC 3339 and the note), then one
// object with "kind":"community" per community in id order with its
// statistics, "members" (external ids from name, nil: decimal internal
// ids, in internal id order) and, when it has any, "hubs" (Community.Hubs,
// named the same way).
func WriteJSONL(w io.Writer, s *Snapshot, name func(uint32) string) error {
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	nf := NameFunc(name)
	err := enc.Encode(s.HeaderJSON())
	var members []string
	for i := 0; err == nil && i < len(s.Communities); i++ {
		c := &s.Communities[i]
		members = members[:0]
		for _, v := range c.Members {
			members = append(members, nf.name(v))
		}
		var hubs []string
		for _, v := range c.Hubs {
			hubs = append(hubs, nf.name(v))
		}
		exp, z := s.InternalZ(c)
		err = enc.Encode(jsonCommunity{
			Kind: "community", Community: c.ID, Size: c.Size, Internal: c.Internal, Degree: c.Degree,
			Density: c.Density, Conductance: c.Conductance, Expected: exp, Z: z, Members: members, Hubs: hubs,
		})
	}
	if err == nil {
		err = bw.Flush()
	}
	if err != nil {
		return fmt.Errorf("snapshot: write json lines %d: %w", s.ID, err)
	}
	return nil
}
