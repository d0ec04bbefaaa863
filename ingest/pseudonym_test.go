package ingest

import (
	"bytes"
	"encoding/base32"
	"encoding/hex"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestPseudonymRFC4231: the pseudonym is the first 16 bytes of
// HMAC-SHA-256 in lower-case unpadded base32. Expected MACs: RFC 4231
// section 4.2 (test case 1) and 4.4 (test case 3), as remembered; the
// base32 step uses the standard library's RFC 4648 encoder.
func TestPseudonymRFC4231(t *testing.T) {
	for _, c := range []struct {
		key, data []byte
		mac       string
	}{
		{bytes.Repeat([]byte{0x0b}, 20), []byte("Hi There"), "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7"},
		{bytes.Repeat([]byte{0xaa}, 20), bytes.Repeat([]byte{0xdd}, 50), "773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe"},
	} {
		p, err := NewPseudonymizer(c.key)
		if err != nil {
			t.Fatal(err)
		}
		mac, _ := hex.DecodeString(c.mac)
		want := strings.ToLower(base32.StdEncoding.WithPadding(base32.NoPadding).EncodeToString(mac[:PseudonymBytes]))
		if got := p.ID(string(c.data)); got != want || len(got) != 26 {
			t.Errorf("pseudonym %q, want %q", got, want)
		}
		// Repeatable, and independent of earlier calls.
		p.ID("something else")
		if got := p.ID(string(c.data)); got != want {
			t.Errorf("second call %q, want %q", got, want)
		}
	}
}

// TestPseudonymizer: key length, key id, Apply on both ids and on
// node-remove, and the key file's trailing newline.
func TestPseudonymizer(t *testing.T) {
	if _, err := NewPseudonymizer([]byte("short")); !errors.Is(err, ErrBadKey) {
		t.Fatalf("short key: %v, want ErrBadKey", err)
	}
	dir := t.TempDir()
	path := filepath.Join(dir, "key")
	if err := os.WriteFile(path, []byte("0123456789abcdefXYZ\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	key, err := ReadKeyFile(path)
	if err != nil || string(key) != "0123456789abcdefXYZ" {
		t.Fatalf("key %q (%v)", key, err)
	}
	a, _ := NewPseudonymizer(key)
	b, _ := NewPseudonymizer([]byte("0123456789abcdefXYz"))
	if bytes.Equal(a.KeyID(), b.KeyID()) || len(a.KeyID()) != 8 {
		t.Fatalf("key ids %x %x", a.KeyID(), b.KeyID())
	}
	if a.ID("acct-1") == b.ID("acct-1") || a.ID("acct-1") == a.ID("acct-2") {
		t.Fatal("pseudonyms do not depend on the key and the id")
	}
	ev := Event{Op: OpAdd, Src: "acct-1", Dst: "acct-2"}
	a.Apply(&ev)
	if ev.Src != a.ID("acct-1") || ev.Dst != a.ID("acct-2") {
		t.Fatalf("Apply: %+v", ev)
	}
	nr := Event{Op: OpNodeRemove, Src: "acct-1"}
	a.Apply(&nr)
	if nr.Src != a.ID("acct-1") || nr.Dst != "" || nr.Validate() != nil {
		t.Fatalf("Apply on node-remove: %+v", nr)
	}
	if err := ev.Validate(); err != nil {
		t.Fatalf("a pseudonymised event is not valid: %v", err)
	}
}
