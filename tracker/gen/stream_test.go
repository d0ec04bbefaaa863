package gen

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"
)

// TestWriteStream: n lines, times non-decreasing, removes only of edges
// added before, the same bytes for the same call.
func TestWriteStream(t *testing.T) {
	var a, b bytes.Buffer
	if err := WriteStream(&a, 2000, true); err != nil {
		t.Fatal(err)
	}
	if err := WriteStream(&b, 2000, true); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Fatal("two streams differ")
	}
	lines := strings.Split(strings.TrimSpace(a.String()), "\n")
	if len(lines) != 2000 {
		t.Fatalf("%d lines, want 2000", len(lines))
	}
	live := map[[2]string]int{}
	last, removes := int64(0), 0
	for i, l := range lines {
		var ev struct {
			Op, Src, Dst string
			TS           int64
		}
		if err := json.Unmarshal([]byte(l), &ev); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		if ev.TS < last {
			t.Fatalf("line %d: time goes back", i+1)
		}
		last = ev.TS
		k := [2]string{ev.Src, ev.Dst}
		switch ev.Op {
		case "add":
			live[k]++
		case "remove":
			removes++
			if live[k] == 0 {
				t.Fatalf("line %d: remove of an edge never added", i+1)
			}
			live[k]--
		}
	}
	if removes == 0 {
		t.Fatal("no removes")
	}
}
