package events

import (
	"encoding/json"
	"errors"
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"

	"shoal/snapshot"
)

// TestScenarios: hand-built cases, each with the exact list of expected
// events (and nothing else). The one-type cases are the test cases listed in
// testdata/SOURCES.md section 5 (synthetic, exact); the partitions are
// given by hand (what a modularity optimiser finds on these graphs), the
// statistics recomputed from the edge lists. Expected Jaccard values are hand
// calculations: shared / (|P| + |N| - shared).
func TestScenarios(t *testing.T) {
	k5a, k5b := clique(span_(0, 4)...), clique(span_(5, 9)...)
	bridge := [][2]int{{4, 5}}
	for _, tc := range []struct {
		name string
		a, b *snapshot.Snapshot
		o    *Options
		want []string
	}{{
		// Two K5 {0..4}=1 and {5..9}=2 joined into one K10 (id 1 kept, the
		// tracker's tie rule). Each gives 5 > 5/2 of its members to 1:
		// Jaccard 5/(5+10-5) = 0.5.
		name: "merge",
		a:    snap(t, 1, cat(k5a, k5b, bridge), map[uint64][]int{1: span_(0, 4), 2: span_(5, 9)}),
		b:    snap(t, 2, clique(span_(0, 9)...), map[uint64][]int{1: span_(0, 9)}),
		want: []string{"merge [1 2]->[1] ov 1>1:5:0.500 2>1:5:0.500 +[]/0 -[]/0"},
	}, {
		// K10 = 1 cut into K5 {0..4}=1 and K5 {5..9}=3: 1 gives each all of
		// its members (5 > 5/2).
		name: "split",
		a:    snap(t, 1, clique(span_(0, 9)...), map[uint64][]int{1: span_(0, 9)}),
		b:    snap(t, 2, cat(k5a, k5b, bridge), map[uint64][]int{1: span_(0, 4), 3: span_(5, 9)}),
		want: []string{"split [1]->[1 3] ov 1>1:5:0.500 1>3:5:0.500 +[]/0 -[]/0"},
	}, {
		// A new isolated K4 {5..8} appears beside an unchanged K5.
		name: "birth",
		a:    snap(t, 1, k5a, map[uint64][]int{1: span_(0, 4)}),
		b:    snap(t, 2, cat(k5a, clique(5, 6, 7, 8)), map[uint64][]int{1: span_(0, 4), 2: {5, 6, 7, 8}}),
		want: []string{
			"continue [1]->[1] ov 1>1:5:1.000 +[]/0 -[]/0",
			"birth []->[2] ov +[5 6 7 8]/4 -[]/0",
		},
	}, {
		// All edges of the K4 {5..8} are deleted: its nodes stay as
		// singletons (below MinSize, so they produce nothing themselves).
		name: "death",
		a:    snap(t, 1, cat(k5a, clique(5, 6, 7, 8)), map[uint64][]int{1: span_(0, 4), 2: {5, 6, 7, 8}}),
		b:    snap(t, 2, k5a, map[uint64][]int{1: span_(0, 4), 3: {5}, 4: {6}, 5: {7}, 6: {8}}),
		want: []string{
			"continue [1]->[1] ov 1>1:5:1.000 +[]/0 -[]/0",
			"death [2]->[] ov +[]/0 -[5 6 7 8]/4",
		},
	}, {
		// K8 plus 2 nodes: Jaccard 8/10 = 0.8 (SOURCES.md section 5), size
		// 10 >= 1.1*8: grow.
		name: "grow",
		a:    snap(t, 1, clique(span_(0, 7)...), map[uint64][]int{1: span_(0, 7)}),
		b:    snap(t, 2, clique(span_(0, 9)...), map[uint64][]int{1: span_(0, 9)}),
		want: []string{"grow [1]->[1] ov 1>1:8:0.800 +[8 9]/2 -[]/0"},
	}, {
		// K10 minus 2 nodes (removed from the graph): Jaccard 0.8, 8 <= 0.9*10.
		name: "shrink",
		a:    snap(t, 1, clique(span_(0, 9)...), map[uint64][]int{1: span_(0, 9)}),
		b:    snap(t, 2, clique(span_(0, 7)...), map[uint64][]int{1: span_(0, 7)}),
		want: []string{"shrink [1]->[1] ov 1>1:8:0.800 +[]/0 -[8 9]/2"},
	}, {
		// Nothing changes.
		name: "continue",
		a:    snap(t, 1, cat(clique(span_(0, 5)...), clique(6, 7, 8, 9), [][2]int{{5, 6}}), map[uint64][]int{1: span_(0, 5), 2: {6, 7, 8, 9}}),
		b:    snap(t, 2, cat(clique(span_(0, 5)...), clique(6, 7, 8, 9), [][2]int{{5, 6}}), map[uint64][]int{1: span_(0, 5), 2: {6, 7, 8, 9}}),
		want: []string{"continue [1]->[1] ov 1>1:6:1.000 +[]/0 -[]/0", "continue [2]->[2] ov 2>2:4:1.000 +[]/0 -[]/0"},
	}, {
		// Two merges and a split in one step: {0..4}=1 + {5..9}=2 -> 1,
		// {10..14}=3 + {15..19}=4 -> 3, {20..29}=5 -> {20..24}=5 + {25..29}=6.
		name: "two merges and a split",
		a: snap(t, 1, cat(clique(span_(0, 4)...), clique(span_(5, 9)...), clique(span_(10, 14)...), clique(span_(15, 19)...), clique(span_(20, 29)...)),
			map[uint64][]int{1: span_(0, 4), 2: span_(5, 9), 3: span_(10, 14), 4: span_(15, 19), 5: span_(20, 29)}),
		b: snap(t, 2, cat(clique(span_(0, 9)...), clique(span_(10, 19)...), clique(span_(20, 24)...), clique(span_(25, 29)...)),
			map[uint64][]int{1: span_(0, 9), 3: span_(10, 19), 5: span_(20, 24), 6: span_(25, 29)}),
		want: []string{
			"merge [1 2]->[1] ov 1>1:5:0.500 2>1:5:0.500 +[]/0 -[]/0",
			"merge [3 4]->[3] ov 3>3:5:0.500 4>3:5:0.500 +[]/0 -[]/0",
			"split [5]->[5 6] ov 5>5:5:0.500 5>6:5:0.500 +[]/0 -[]/0",
		},
	}, {
		// Many-to-many in one step (Greene et al. 2010 allow merge and split
		// together). A: 1 = {0..9}, 2 = {10..18}. B: 1 = {0..5, 10..14},
		// 3 = {6..9}, 4 = {15..18}. Old 1 gives 6 > 10/2 of itself and old 2
		// gives 5 > 9/2 of itself to new 1: merge (Jaccard 6/15 = 0.4 and
		// 5/15). Old 1 also gives new 1 6 > 11/2 and new 3 4 > 4/2 of their
		// members: split (Jaccard 0.4 and 4/10). New 4's only overlap is with
		// old 2, which is in the merge: birth (Jaccard 4/9).
		name: "merge and split sharing communities",
		a:    snap(t, 1, nil, map[uint64][]int{1: span_(0, 9), 2: span_(10, 18)}),
		b:    snap(t, 2, nil, map[uint64][]int{1: {0, 1, 2, 3, 4, 5, 10, 11, 12, 13, 14}, 3: span_(6, 9), 4: span_(15, 18)}),
		want: []string{
			"merge [1 2]->[1] ov 1>1:6:0.400 2>1:5:0.333 +[]/0 -[6 7 8 9 15 16 17 18]/8",
			"split [1]->[1 3] ov 1>1:6:0.400 1>3:4:0.400 +[10 11 12 13 14]/5 -[]/0",
			"birth []->[4] ov 2>4:4:0.444 +[15 16 17 18]/4 -[]/0",
		},
	}, {
		// Community 1 = {0..9} loses half its members, who form their own
		// K5 7 = {5..9}, and gains 5 new nodes {100..104}. 1 gives 5 to each
		// of 1 and 7: a majority of 7 (5 > 2.5) but not of the new 1 (5 is
		// not > 10/2), so no split. Best match of the old 1: a tie at 5,
		// won by the new 1 (least member 0 < 5); mutual, Jaccard 5/15 = 1/3
		// >= 0.3, same size: continue, with 5 joined and 5 left. 7 is not
		// a mutual best: birth, with its overlap (Jaccard 5/10) shown.
		name: "loses half and gains others",
		a:    snap(t, 1, clique(span_(0, 9)...), map[uint64][]int{1: span_(0, 9)}),
		b: snap(t, 2, cat(clique(0, 1, 2, 3, 4, 100, 101, 102, 103, 104), clique(span_(5, 9)...)),
			map[uint64][]int{1: {0, 1, 2, 3, 4, 100, 101, 102, 103, 104}, 7: span_(5, 9)}),
		want: []string{
			"continue [1]->[1] ov 1>1:5:0.333 +[100 101 102 103 104]/5 -[5 6 7 8 9]/5",
			"birth []->[7] ov 1>7:5:0.500 +[5 6 7 8 9]/5 -[]/0",
		},
	}, {
		// Pairs {0,1}=1, {2,3}=2 re-paired as {0,2}=3, {1,3}=4: all below
		// MinSize 3, no events.
		name: "below min size",
		a:    snap(t, 1, [][2]int{{0, 1}, {2, 3}}, map[uint64][]int{1: {0, 1}, 2: {2, 3}}),
		b:    snap(t, 2, [][2]int{{0, 2}, {1, 3}}, map[uint64][]int{3: {0, 2}, 4: {1, 3}}),
		want: []string{},
	}, {
		// The same with MinSize 2, so the filter above is what silenced it.
		// Every overlap is 1 (no majority > 1, so no merge or split). Best
		// of 1: tie 3 vs 4, won by 3 (least member 0 < 1); best of 3: tie 1
		// vs 2, won by 1 (0 < 2): continue 1->3, Jaccard 1/3. 2's best is 3
		// (taken, not mutual) -> death; 4's best is 1 -> birth.
		name: "min size 2",
		a:    snap(t, 1, [][2]int{{0, 1}, {2, 3}}, map[uint64][]int{1: {0, 1}, 2: {2, 3}}),
		b:    snap(t, 2, [][2]int{{0, 2}, {1, 3}}, map[uint64][]int{3: {0, 2}, 4: {1, 3}}),
		o:    &Options{MinSize: 2},
		want: []string{
			"continue [1]->[3] ov 1>3:1:0.333 +[2]/1 -[1]/1",
			"birth []->[4] ov 1>4:1:0.333 2>4:1:0.333 +[1 3]/2 -[]/0",
			"death [2]->[] ov 2>3:1:0.333 2>4:1:0.333 +[]/0 -[2 3]/2",
		},
	}, {
		// A K5 whose nodes all become singletons in B: death, and the
		// singletons produce nothing.
		name: "dissolved into singletons",
		a:    snap(t, 1, k5a, map[uint64][]int{1: span_(0, 4)}),
		b:    snap(t, 2, nil, map[uint64][]int{1: {0}, 2: {1}, 3: {2}, 4: {3}, 5: {4}}),
		want: []string{"death [1]->[] ov +[]/0 -[0 1 2 3 4]/5"},
	}} {
		t.Run(tc.name, func(t *testing.T) {
			got := briefs(classify(t, tc.a, tc.b, tc.o))
			if !reflect.DeepEqual(got, tc.want) {
				t.Errorf("events:\n got %q\nwant %q", got, tc.want)
			}
		})
	}
}

// TestEventRecord checks the full record of one continuation: K6 {0..5} = 1
// and K4 {6..9} = 2 joined by the edge 5-6. By hand, community 1: internal
// 15, degree 2*15+1 = 31, density 15/15 = 1, cut 1, 2m = 2*22 = 44,
// conductance 1/min(31, 13) = 1/13; the configuration model expects
// 31^2 / (4 * 22) = 10.920455 inside (unit weights), so z = (15 -
// 10.920455) / sqrt(10.920455) = 1.234501.
func TestEventRecord(t *testing.T) {
	edges := cat(clique(span_(0, 5)...), clique(6, 7, 8, 9), [][2]int{{5, 6}})
	parts := map[uint64][]int{1: span_(0, 5), 2: {6, 7, 8, 9}}
	a, b := snap(t, 4, edges, parts), snap(t, 9, edges, parts)
	// A hub the later snapshot's community 1 touches (the timeline's hub
	// policy fills Hubs; node 9 stands in for one here) is named in the
	// record's after side only.
	b.Communities[0].Hubs = []uint32{9}
	evs := classify(t, a, b, &Options{Members: true, Name: func(v uint32) string { return "acct-" + string(rune('a'+v)) }})
	if len(evs) != 2 {
		t.Fatalf("%d events, want 2", len(evs))
	}
	ev := evs[0]
	wantSide := Side{Community: 1, Size: 6, Stats: Stats{Internal: 15, Degree: 31, Density: 1, Conductance: 1.0 / 13},
		Members: []string{"acct-a", "acct-b", "acct-c", "acct-d", "acct-e", "acct-f"}}
	if len(ev.Before[0].Hubs) != 0 || !slices.Equal(ev.After[0].Hubs, []string{"acct-j"}) {
		t.Errorf("hubs before %v after %v, want none and [acct-j]", ev.Before[0].Hubs, ev.After[0].Hubs)
	}
	ev.After[0].Hubs = nil
	for _, s := range [][]Side{ev.Before, ev.After} {
		if st := s[0].Stats; math.Abs(st.Expected-961.0/88) > 1e-9 || math.Abs(st.Z-1.234501) > 1e-6 {
			t.Errorf("expected %v, z %v; by hand 10.920455 and 1.234501", st.Expected, st.Z)
		}
		s[0].Stats.Expected, s[0].Stats.Z = 0, 0
	}
	if !reflect.DeepEqual(ev.Before, []Side{wantSide}) || !reflect.DeepEqual(ev.After, []Side{wantSide}) {
		t.Errorf("before %+v after %+v, want %+v", ev.Before, ev.After, wantSide)
	}
	if ev.Schema != "shoal.event/1" || ev.Graph != "test" || ev.FromSnapshot != 4 || ev.ToSnapshot != 9 ||
		ev.FromTime != "1970-01-01T04:00:00Z" || ev.ToTime != "1970-01-01T09:00:00Z" || !strings.Contains(ev.Note, "not evidence") {
		t.Errorf("record fields: %+v", ev)
	}
	if len(ev.ID) != 32 || strings.Trim(ev.ID, "0123456789abcdef") != "" || ev.ID == evs[1].ID {
		t.Errorf("id %q (other %q): want 32 distinct hex digits", ev.ID, evs[1].ID)
	}
	// The id is a function of graph, snapshots, type and communities only.
	again := classify(t, a, b, nil)
	if again[0].ID != ev.ID {
		t.Errorf("id changed with options: %s vs %s", again[0].ID, ev.ID)
	}
	c := snap(t, 10, edges, parts)
	if other := classify(t, a, c, nil); other[0].ID == ev.ID {
		t.Errorf("id did not change with the snapshot id")
	}
	// JSON: one line; empty lists are [] (not null); members only on request.
	var sb strings.Builder
	if err := Encode(&sb, &again[0]); err != nil {
		t.Fatal(err)
	}
	line := sb.String()
	if strings.Count(line, "\n") != 1 || !strings.HasSuffix(line, "\n") {
		t.Fatalf("not one line: %q", line)
	}
	var raw map[string]any
	if err := json.Unmarshal([]byte(line), &raw); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"schema", "id", "type", "graph", "from_snapshot", "to_snapshot", "from_time", "to_time",
		"before", "after", "overlaps", "joined", "joined_count", "left", "left_count", "note"} {
		if _, ok := raw[f]; !ok {
			t.Errorf("field %q missing in %s", f, line)
		}
	}
	if !strings.Contains(line, `"joined":[]`) || strings.Contains(line, `"members":`) {
		t.Errorf("want joined [] and no members: %s", line)
	}
	var back Event
	if err := json.Unmarshal([]byte(line), &back); err != nil || !reflect.DeepEqual(back, again[0]) {
		t.Errorf("JSON round trip differs: %+v", back)
	}
}

// TestMaxListed: a K30 grows by 150 nodes; joined is capped at MaxListed with
// the full count, and negative MaxListed lists nothing.
func TestMaxListed(t *testing.T) {
	a := snap(t, 1, nil, map[uint64][]int{1: span_(0, 29)})
	b := snap(t, 2, nil, map[uint64][]int{1: span_(0, 179)})
	// Jaccard 30/180 < 0.3: not a continuation, so 1 dies and 1 is born.
	evs := classify(t, a, b, nil)
	if got := briefs(evs); len(got) != 2 || evs[0].Type != Birth || evs[1].Type != Death {
		t.Fatalf("events %q, want birth and death", got)
	}
	if len(evs[0].Joined) != 100 || evs[0].JoinedCount != 180 || evs[0].Joined[99] != "99" {
		t.Errorf("birth joined: %d listed (last %q), count %d; want 100, \"99\", 180", len(evs[0].Joined), evs[0].Joined[99], evs[0].JoinedCount)
	}
	evs = classify(t, a, b, &Options{Theta: 0.1, MaxListed: 7})
	if len(evs) != 1 || evs[0].Type != Grow || len(evs[0].Joined) != 7 || evs[0].JoinedCount != 150 || evs[0].Joined[0] != "30" {
		t.Errorf("theta 0.1, max 7: %q", briefs(evs))
	}
	evs = classify(t, a, b, &Options{Theta: 0.1, MaxListed: -1})
	if len(evs) != 1 || len(evs[0].Joined) != 0 || evs[0].JoinedCount != 150 {
		t.Errorf("max -1: %q", briefs(evs))
	}
}

func TestClassifyErrors(t *testing.T) {
	a := snap(t, 1, nil, map[uint64][]int{1: {0, 1, 2}})
	other := snap(t, 2, nil, map[uint64][]int{1: {0, 1, 2}})
	other.Graph = "other"
	dup := snap(t, 2, nil, map[uint64][]int{1: {0, 1, 2}, 2: {3, 4}})
	dup.Communities[1].Members = []uint32{2, 4} // node 2 twice
	for _, tc := range []struct {
		name string
		b    *snapshot.Snapshot
		o    *Options
	}{
		{"graph mismatch", other, nil},
		{"node in two communities", dup, nil},
		{"nil", nil, nil},
		{"bad theta", a, &Options{Theta: 1.5}},
		{"bad growth", a, &Options{GrowthFraction: -1}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := Classify(a, tc.b, tc.o); !errors.Is(err, ErrInvalid) {
				t.Errorf("err = %v, want ErrInvalid", err)
			}
		})
	}
	o := Options{MinSize: -1, Theta: math.NaN(), GrowthFraction: 2}
	err := o.Validate()
	if err == nil || strings.Count(err.Error(), ";") != 2 {
		t.Errorf("Validate should report all three problems: %v", err)
	}
}
