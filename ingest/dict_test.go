package ingest

import (
	"fmt"
	"math/rand/v2"
	"runtime"
	"testing"
)

func TestDictDenseIDs(t *testing.T) {
	d := NewDict()
	if d.Len() != 0 {
		t.Fatal("not empty")
	}
	names := []string{"acct-1", "acct-2", "", "Zürich", "acct-1", "😀", "acct-2"}
	wantIDs := []uint32{0, 1, 2, 3, 0, 4, 1} // first-come order, repeats reuse
	for i, n := range names {
		if got := d.ID(n); got != wantIDs[i] {
			t.Errorf("ID(%q) = %d, want %d", n, got, wantIDs[i])
		}
	}
	if d.Len() != 5 {
		t.Errorf("Len = %d", d.Len())
	}
	for i, n := range []string{"acct-1", "acct-2", "", "Zürich", "😀"} {
		if d.Name(uint32(i)) != n {
			t.Errorf("Name(%d) = %q, want %q", i, d.Name(uint32(i)), n)
		}
		if id, ok := d.Lookup(n); !ok || id != uint32(i) {
			t.Errorf("Lookup(%q) = %d, %v", n, id, ok)
		}
		if got := string(d.AppendName([]byte("x:"), uint32(i))); got != "x:"+n {
			t.Errorf("AppendName = %q", got)
		}
	}
	if _, ok := d.Lookup("acct-3"); ok || d.Len() != 5 {
		t.Error("Lookup added or found an absent name")
	}
	defer func() {
		if recover() == nil {
			t.Error("Name out of range did not panic")
		}
	}()
	d.Name(5)
}

func TestDictHashCollisions(t *testing.T) {
	// Forge equal hashes: names that share a hash must still get their own
	// ids and be found again.
	d := NewDict()
	names := []string{"a", "b", "c", "d"}
	for i, n := range names {
		id, ok := idHashed(d, n, 42)
		if !ok || id != uint32(i) {
			t.Fatalf("idHashed(%q) = %d, %v", n, id, ok)
		}
	}
	for i, n := range names {
		if id, ok := idHashed(d, n, 42); !ok || id != uint32(i) {
			t.Errorf("again idHashed(%q) = %d", n, id)
		}
		if id, ok := lookupHashed(d, n, 42); !ok || id != uint32(i) {
			t.Errorf("lookupHashed(%q) = %d, %v", n, id, ok)
		}
	}
	if _, ok := lookupHashed(d, "e", 42); ok {
		t.Error("found an absent colliding name")
	}
	if _, ok := lookupHashed(d, "a", 43); ok {
		t.Error("found a name under another hash")
	}
}

func TestDictAgainstMap(t *testing.T) {
	// Reference: a map and a slice, the obvious implementation.
	rng := rand.New(rand.NewPCG(1, 2))
	d := NewDict()
	ref := map[string]uint32{}
	var refNames []string
	for range 50000 {
		n := fmt.Sprintf("node-%d", rng.IntN(20000))
		if rng.IntN(4) == 0 {
			id, ok := d.Lookup(n)
			rid, rok := ref[n]
			if ok != rok || id != rid {
				t.Fatalf("Lookup(%q) = %d %v, want %d %v", n, id, ok, rid, rok)
			}
			continue
		}
		if _, ok := ref[n]; !ok {
			ref[n] = uint32(len(refNames))
			refNames = append(refNames, n)
		}
		if got := d.ID(n); got != ref[n] {
			t.Fatalf("ID(%q) = %d, want %d", n, got, ref[n])
		}
	}
	if d.Len() != len(refNames) {
		t.Fatalf("Len %d, want %d", d.Len(), len(refNames))
	}
	for i, n := range refNames {
		if d.Name(uint32(i)) != n {
			t.Fatalf("Name(%d) = %q, want %q", i, d.Name(uint32(i)), n)
		}
	}
}

func TestDictAllocs(t *testing.T) {
	d := NewDict()
	d.ID("acct-1093")
	b := []byte("acct-1093")
	var buf []byte
	if a := testing.AllocsPerRun(100, func() {
		d.ID("acct-1093")
		d.Lookup("acct-1093")
		d.idBytes(b)
		buf = d.AppendName(buf[:0], 0)
	}); a != 0 {
		t.Errorf("%v allocations on lookups of a present name", a)
	}
}

// BenchmarkDict interns 10^6 distinct names and reports the heap bytes
// per name, against a map[string]uint32 plus []string (the obvious way).
func BenchmarkDict(b *testing.B) {
	const n = 1000000
	names := make([][]byte, n)
	for i := range names {
		names[i] = fmt.Appendf(nil, "acct-%07d", i) // 12 bytes
	}
	heap := func() uint64 {
		runtime.GC()
		var m runtime.MemStats
		runtime.ReadMemStats(&m)
		return m.HeapAlloc
	}
	b.Run("dict", func(b *testing.B) {
		var perName float64
		for b.Loop() {
			before := heap()
			d := NewDict()
			for _, nm := range names {
				d.idBytes(nm)
			}
			perName = float64(heap()-before) / n
			runtime.KeepAlive(d)
		}
		b.ReportMetric(perName, "heapB/name")
	})
	b.Run("map+slice", func(b *testing.B) {
		var perName float64
		for b.Loop() {
			before := heap()
			m := map[string]uint32{}
			var s []string
			for _, nm := range names {
				str := string(nm)
				m[str] = uint32(len(s))
				s = append(s, str)
			}
			perName = float64(heap()-before) / n
			runtime.KeepAlive(m)
			runtime.KeepAlive(s)
		}
		b.ReportMetric(perName, "heapB/name")
	})
}
