package ingest_test

import (
	"fmt"
	"strings"

	"shoal/ingest"
)

// The four example events of doc.go (Formats) in one message (invented
// ids), with one bad line, which is reported on its own.
func ExampleDecodeMessage() {
	msg := `{"op":"add","src":"acct-1093","dst":"acct-2210","w":125.0,"ts":"2026-11-30T08:15:02Z"}
{"op":"remove","src":"acct-1093","dst":"acct-2210"}
{"op":"set","src":"svc-cart","dst":"svc-price","weight":42}
{"op":"node-remove","src":"acct-1093"}
`
	evs, errs := ingest.DecodeMessage([]byte(msg), nil)
	for _, ev := range evs {
		fmt.Println(ev.Op, ev.Src, ev.Dst, ev.W, ev.TS)
	}
	for _, err := range errs {
		fmt.Println(err)
	}
	// Output:
	// add acct-1093 acct-2210 125 1796026502000
	// remove acct-1093 acct-2210 0 0
	// node-remove acct-1093  0 0
	// ingest: line 3: unknown field "weight"
}

// Loading events (invented ids): parallel edges are summed in either
// direction; the node-remove drops c's edges, self-loop included, but c
// stays in the Dict and a later add attaches it again.
func ExampleLoad() {
	in := `{"src":"a","dst":"b","w":1}
{"src":"b","dst":"a","w":2}
{"src":"b","dst":"c"}
{"src":"c","dst":"c","w":4}
{"op":"node-remove","src":"c"}
{"src":"a","dst":"c","w":0.5}
`
	ld, err := ingest.Load(strings.NewReader(in), ingest.LoadOptions{})
	if err != nil {
		panic(err)
	}
	for _, e := range ld.Edges {
		fmt.Println(ld.Dict.Name(e.U), ld.Dict.Name(e.V), e.W)
	}
	fmt.Println(ld.Dict.Len(), "nodes,", ld.Events, "events")
	// Output:
	// a b 3
	// a c 0.5
	// 3 nodes, 6 events
}
