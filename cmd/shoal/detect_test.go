package main

import (
	"encoding/json"
	"math"
	"testing"
)

// TestDetectScanAndNull: the resolution scan on karate reproduces gonum
// v0.17.0's values at gamma 0.5 (Q = 0.6218, 2 communities) and 2
// (Q = 0.1645, 7 communities; testdata/SOURCES.md, tol 1e-3); the null
// model puts karate's Q well above rewired graphs (z > 3, a common reading
// of significance), and each community's internal weight above its
// configuration-model expectation tot^2/4m.
func TestDetectScanAndNull(t *testing.T) {
	out, errs, code := runIn(t, "", "detect", testdata("karate.tsv"), "--scan", "0.5:2:0.5", "--null", "5", "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var r detectResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if len(r.Scan) != 4 {
		t.Fatalf("%d scan points, want 4 (0.5, 1, 1.5, 2)", len(r.Scan))
	}
	for _, c := range []struct {
		i     int
		q     float64
		comms int
	}{{0, 0.6218, 2}, {3, 0.1645, 7}} {
		sp := r.Scan[c.i]
		if math.Abs(sp.Modularity-c.q) > 1e-3 || sp.Communities != c.comms {
			t.Errorf("gamma %v: Q %.4f with %d communities, gonum %.4f with %d", sp.Resolution, sp.Modularity, sp.Communities, c.q, c.comms)
		}
	}
	if r.Null == nil || r.Null.Z < 3 || r.Null.Mean >= r.Modularity {
		t.Fatalf("null model: %+v", r.Null)
	}
	for _, c := range r.Null.Communities {
		if c.Ratio <= 1 {
			t.Errorf("community %d: internal %.1f not above expected %.1f", c.Community, c.Internal, c.Expected)
		}
	}
	for _, bad := range []string{"1:0.5:0.1", "a:b:c", "0.5:2", "0:1:0.1"} {
		if _, _, code := runIn(t, "", "detect", testdata("karate.tsv"), "--scan", bad); code != 2 {
			t.Errorf("--scan %s: exit %d, want 2", bad, code)
		}
	}
}
