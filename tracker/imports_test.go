package tracker_test

import (
	"os/exec"
	"slices"
	"strings"
	"testing"
)

// TestImports keeps the import direction given in DEVELOPERS.md (Layout):
// cmd -> ingest, snapshot, events -> tracker, and tracker free of I/O
// stacks (no NATS, no Pebble, no net, no exec; os only through fmt; see
// tracker's doc.go: pure, no I/O). The rule and the test follow pebble's
// TestForbiddenImports.
func TestImports(t *testing.T) {
	rules := map[string][]string{
		"shoal/tracker":  {"github.com/nats-io", "github.com/cockroachdb/pebble", "net", "os/exec", "shoal/ingest", "shoal/snapshot", "shoal/events"},
		"shoal/ingest":   {"shoal/snapshot", "shoal/events", "shoal/cmd"},
		"shoal/snapshot": {"shoal/ingest", "shoal/events", "github.com/nats-io", "shoal/cmd"},
		"shoal/events":   {"shoal/ingest", "shoal/cmd"},
		// The timeline has no NATS (and, below, no flags, HTTP or files):
		// cmd wires those.
		"shoal/events/timeline": {"shoal/ingest", "shoal/cmd", "github.com/nats-io"},
	}
	for pkg, forbidden := range rules {
		out, err := exec.Command("go", "list", "-deps", pkg).CombinedOutput()
		if err != nil {
			t.Fatalf("go list %s: %v\n%s", pkg, err, out)
		}
		for _, dep := range strings.Fields(string(out)) {
			for _, f := range forbidden {
				if dep == f || strings.HasPrefix(dep, f+"/") {
					t.Errorf("%s depends on %s", pkg, dep)
				}
			}
		}
	}
}

// TestDirectImports: what a package must not import itself (its
// dependencies may: Pebble pulls in net/http for its error reports).
func TestDirectImports(t *testing.T) {
	rules := map[string][]string{
		"shoal/events/timeline": {"flag", "net", "net/http", "os", "time/tzdata"},
		"shoal/tracker":         {"os", "flag"},
	}
	for pkg, forbidden := range rules {
		out, err := exec.Command("go", "list", "-f", "{{join .Imports \" \"}}", pkg).CombinedOutput()
		if err != nil {
			t.Fatalf("go list %s: %v\n%s", pkg, err, out)
		}
		for _, dep := range strings.Fields(string(out)) {
			if slices.Contains(forbidden, dep) {
				t.Errorf("%s imports %s", pkg, dep)
			}
		}
	}
}
