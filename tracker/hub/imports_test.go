package hub

import (
	"os/exec"
	"strings"
	"testing"
)

// TestPure: the package is pure (doc.go): besides the standard library it
// depends on shoal/tracker alone, and it imports no I/O, clock or
// concurrency package itself (the rule of tracker/imports_test.go, whose
// top-level file belongs to the tracker core).
func TestPure(t *testing.T) {
	out, err := exec.Command("go", "list", "-f", "{{join .Imports \" \"}}", "shoal/tracker/hub").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	for _, dep := range strings.Fields(string(out)) {
		switch {
		case dep == "shoal/tracker":
		case strings.Contains(dep, "."), strings.HasPrefix(dep, "shoal/"):
			t.Errorf("imports %s: only the standard library and shoal/tracker", dep)
		case dep == "os" || dep == "flag" || dep == "time" || dep == "sync" || strings.HasPrefix(dep, "net") || strings.HasPrefix(dep, "os/") || dep == "io" || strings.HasPrefix(dep, "io/"):
			t.Errorf("imports %s: no I/O, clock or goroutines", dep)
		}
	}
}
