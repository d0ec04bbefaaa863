package snapshot

import (
	"bufio"
	"encoding/json"
	"strings"
	"testing"

	"shoal/tracker"
)

func smallSnapshot(t *testing.T) *Snapshot {
	t.Helper()
	// Invented example: nodes 0..4, two communities.
	s, err := Freeze(Header{ID: 12, Graph: "demo", Watermark: 1764490502000, Modularity: 0.25, Gamma: 1, Edges: 4},
		[]uint64{8, 8, 3, 3, 3},
		[]tracker.CommunityStats{{ID: 8, Size: 2, Internal: 1, Degree: 2}, {ID: 3, Size: 3, Internal: 3, Degree: 6}})
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func TestWriteTSV(t *testing.T) {
	s := smallSnapshot(t)
	names := []string{"a", "b\twith tab", `c\`, "d", "e"}
	var sb strings.Builder
	if err := WriteTSV(&sb, s, func(v uint32) string { return names[v] }); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(sb.String(), "\n"), "\n")
	var body []string
	for _, l := range lines {
		if !strings.HasPrefix(l, "#") {
			body = append(body, l)
		}
	}
	// Communities in id order (3 before 8), members in node order, escapes.
	want := []string{"3\tc\\\\", "3\td", "3\te", "8\ta", "8\tb\\twith tab"}
	if strings.Join(body, "|") != strings.Join(want, "|") {
		t.Errorf("body %q, want %q", body, want)
	}
	if !strings.Contains(lines[0], "snapshot 12") || !strings.Contains(lines[0], "2025-11-30T08:15:02Z") ||
		!strings.Contains(sb.String(), "not evidence") || lines[2] != "# community\tnode" {
		t.Errorf("header lines %q", lines[:3])
	}
	sb.Reset()
	if err := WriteTSV(&sb, s, nil); err != nil || !strings.Contains(sb.String(), "\n8\t0\n8\t1\n") {
		t.Errorf("default names: %q, %v", sb.String(), err)
	}
}

func TestWriteJSONL(t *testing.T) {
	s := smallSnapshot(t)
	var sb strings.Builder
	if err := WriteJSONL(&sb, s, nil); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(strings.NewReader(sb.String()))
	var objs []map[string]any
	for sc.Scan() {
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatalf("line %q: %v", sc.Text(), err)
		}
		objs = append(objs, m)
	}
	if len(objs) != 3 {
		t.Fatalf("%d lines, want header + 2 communities", len(objs))
	}
	h := objs[0]
	if h["schema"] != JSONSchema || h["kind"] != "header" || h["id"] != 12.0 || h["watermark"] != "2025-11-30T08:15:02Z" ||
		h["nodes"] != 5.0 || h["communities"] != 2.0 || h["note"] != Note {
		t.Errorf("header %v", h)
	}
	// Community 3: internal 3 of 3 pairs -> density 1; cut 0 -> conductance 0.
	c := objs[1]
	if c["kind"] != "community" || c["community"] != 3.0 || c["size"] != 3.0 || c["density"] != 1.0 || c["conductance"] != 0.0 {
		t.Errorf("community %v", c)
	}
	if m := c["members"].([]any); len(m) != 3 || m[0] != "2" || m[2] != "4" {
		t.Errorf("members %v", m)
	}
}
