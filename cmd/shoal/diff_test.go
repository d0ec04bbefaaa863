package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"shoal/events"
)

func diffSummaryOf(t *testing.T, stderr string) diffSummary {
	t.Helper()
	var s diffSummary
	if err := json.Unmarshal([]byte(stderr), &s); err != nil {
		t.Fatalf("summary %q: %v", stderr, err)
	}
	return s
}

// TestDiffSelf: a graph diffed against itself changes nothing, so every
// community above the size floor continues, one to one, with the same id
// (the warm start keeps ids), the same members and Jaccard 1; no other
// event type appears. On karate (Zachary 1977) and football (Girvan and
// Newman 2002), testdata/SOURCES.md.
// The same must hold under the CPM objective, whose value is then the
// summary's quality.
func TestDiffSelf(t *testing.T) {
	for _, c := range [][]string{{"karate.tsv"}, {"football.tsv"}, {"football.tsv", "--objective", "cpm", "--resolution", "0.2"}} {
		name := c[0]
		f := testdata(name)
		out, errs, code := runIn(t, "", append([]string{"diff", f, f, "--members", "--json"}, c[1:]...)...)
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", name, code, errs)
		}
		sum := diffSummaryOf(t, errs)
		evs := parseEvents(t, out)
		if len(evs) == 0 || len(evs) != sum.New.Eligible || sum.Old.Eligible != sum.New.Eligible {
			t.Fatalf("%s: %d events for %d/%d eligible communities", name, len(evs), sum.Old.Eligible, sum.New.Eligible)
		}
		if sum.Old.Modularity != sum.New.Modularity || sum.NodesAdded != 0 || sum.NodesRemoved != 0 {
			t.Fatalf("%s: summary %+v", name, sum)
		}
		if len(c) > 1 && (sum.Objective != "cpm" || sum.Old.Quality != sum.New.Quality || sum.Old.Quality <= 0 || sum.Old.Quality == sum.Old.Modularity) {
			t.Fatalf("%s under cpm: objective %q, quality %v and %v, modularity %v", name, sum.Objective, sum.Old.Quality, sum.New.Quality, sum.Old.Modularity)
		}
		for _, ev := range evs {
			if ev.Type != events.Continue {
				t.Fatalf("%s: %s event in a self-diff", name, ev.Type)
			}
			b, a := ev.Before[0], ev.After[0]
			if b.Community != a.Community || ev.Overlaps[0].Jaccard != 1 || !slices.Equal(b.Members, a.Members) || len(b.Members) != b.Size {
				t.Fatalf("%s: continue %d -> %d, Jaccard %v", name, b.Community, a.Community, ev.Overlaps[0].Jaccard)
			}
			if ev.JoinedCount != 0 || ev.LeftCount != 0 {
				t.Fatalf("%s: joined %d left %d in a self-diff", name, ev.JoinedCount, ev.LeftCount)
			}
		}
	}
}

// TestDiffPlantedGroup: NEW is karate plus a planted group, a 6-clique on
// six new nodes (invented data, not part of karate). There is exactly one
// birth, and its members are the six planted nodes. The rest of the graph
// did not change, so nothing dies, merges or splits, and every other event
// keeps its community id. Some karate nodes may still move: adding 15 edges
// to a graph of 78 shifts where modularity's optimum lies (the resolution
// limit, Fortunato and Barthelemy 2007), so grow and shrink are allowed.
func TestDiffPlantedGroup(t *testing.T) {
	base, err := os.ReadFile(testdata("karate.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	b.Write(base)
	b.WriteString("# invented: a planted group of six new nodes\n")
	var planted []string
	for i := 1; i <= 6; i++ {
		planted = append(planted, fmt.Sprintf("planted-%d", i))
		for j := i + 1; j <= 6; j++ {
			fmt.Fprintf(&b, "planted-%d planted-%d\n", i, j)
		}
	}
	path := filepath.Join(t.TempDir(), "karate_planted.tsv")
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	out, errs, code := runIn(t, "", "diff", testdata("karate.tsv"), path, "--members", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if sum := diffSummaryOf(t, errs); sum.NodesAdded != 6 || sum.NodesKept != 34 || sum.NodesRemoved != 0 {
		t.Fatalf("summary %+v: want 34 kept, 6 added", sum)
	}
	births := 0
	for _, ev := range parseEvents(t, out) {
		switch ev.Type {
		case events.Birth:
			births++
			if got := memberNames(ev.After[0]); !slices.Equal(got, planted) {
				t.Errorf("born community has members %v, want %v", got, planted)
			}
			if !slices.Equal(sortedCopy(ev.Joined), planted) || ev.JoinedCount != 6 {
				t.Errorf("birth joined %v (%d)", ev.Joined, ev.JoinedCount)
			}
		case events.Continue, events.Grow, events.Shrink:
			if ev.Before[0].Community != ev.After[0].Community {
				t.Errorf("%s from %d to %d: an unchanged region must keep its id", ev.Type, ev.Before[0].Community, ev.After[0].Community)
			}
			for _, m := range ev.After[0].Members {
				if strings.HasPrefix(m, "planted-") {
					t.Errorf("planted node %s in karate community %d", m, ev.After[0].Community)
				}
			}
		default:
			t.Errorf("unexpected %s event", ev.Type)
		}
	}
	if births != 1 {
		t.Fatalf("%d births, want 1", births)
	}
}

// TestDiffRemovedGroup is a hand-built case (invented data): OLD has two
// 5-cliques a and b joined by one edge; NEW has only a. Exactly two
// events: a continues with its id, b dies with its five members.
func TestDiffRemovedGroup(t *testing.T) {
	dir := t.TempDir()
	a, _ := clique("a", 5, 0)
	bq, _ := clique("b", 5, 0)
	old, cur := filepath.Join(dir, "old.tsv"), filepath.Join(dir, "new.tsv")
	if err := os.WriteFile(old, []byte(a+bq+"a1 b1 1\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(cur, []byte(a), 0o600); err != nil {
		t.Fatal(err)
	}
	out, errs, code := runIn(t, "", "diff", old, cur, "--members", "--old-time", "2026-01-01T00:00:00Z", "--new-time", "2026-01-02T00:00:00Z")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	evs := parseEvents(t, out)
	if len(evs) != 2 || evs[0].Type != events.Continue || evs[1].Type != events.Death {
		t.Fatalf("events %v, want continue and death", countTypes(evs))
	}
	if m := memberNames(evs[1].Before[0]); !slices.Equal(m, []string{"b1", "b2", "b3", "b4", "b5"}) || evs[1].LeftCount != 5 {
		t.Fatalf("death of %v", m)
	}
	if evs[0].Before[0].Community != evs[0].After[0].Community || evs[0].FromTime != "2026-01-01T00:00:00Z" || evs[0].ToTime != "2026-01-02T00:00:00Z" {
		t.Fatalf("continue %+v", evs[0])
	}
	if !strings.Contains(errs, "5 in both, 0 only in NEW, 5 only in OLD") {
		t.Fatalf("summary %q", errs)
	}
}

// TestDiffBadInput: a bad line in either file gives exit code 2 with the
// file and line, and nothing on stdout; so does bad usage.
func TestDiffBadInput(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.tsv")
	if err := os.WriteFile(bad, []byte("a b 1\nb c 2\nc a NaN\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	k := testdata("karate.tsv")
	for _, args := range [][]string{{"diff", k, bad}, {"diff", bad, k}} {
		out, errs, code := runBin(t, "", args...)
		if code != 2 || out != "" || !strings.Contains(errs, "bad.tsv:3") {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want 2, nothing, bad.tsv:3", args, code, out, errs)
		}
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"diff", k}, "want two files"},
		{[]string{"diff", k, k, "--min-size", "0"}, "min size"},
		{[]string{"diff", k, k, "--growth", "1"}, "growth"},
		{[]string{"diff", k, k, "--old-time", "yesterday"}, "--old-time"},
		{[]string{"diff", "-", "-"}, "only one"},
	} {
		out, errs, code := runIn(t, "", c.args...)
		if code != 2 || out != "" || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want 2 and %q", c.args, code, out, errs, c.want)
		}
	}
}

func sortedCopy(s []string) []string {
	c := slices.Clone(s)
	slices.Sort(c)
	return c
}
