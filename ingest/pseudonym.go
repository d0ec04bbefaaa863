package ingest

import (
	"bytes"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/base32"
	"errors"
	"fmt"
	"hash"
	"os"
)

// Pseudonym parameters: an id is replaced by the first PseudonymBytes bytes
// of HMAC-SHA-256(key, id) (RFC 2104, FIPS 180-4), in lower-case base32
// without padding (RFC 4648): 26 characters from a-z and 2-7. 128 bits make
// a collision between two ids of the same graph improbable (about n^2/2^129
// for n ids: 3e-18 for a billion).
const (
	PseudonymBytes = 16
	// MinKeyBytes is the shortest key accepted.
	MinKeyBytes = 16
)

// ErrBadKey is returned for a pseudonymisation key that is too short.
var ErrBadKey = errors.New("ingest: bad pseudonymisation key")

var pseudonymEncoding = base32.NewEncoding("abcdefghijklmnopqrstuvwxyz234567").WithPadding(base32.NoPadding)

// Pseudonymizer replaces node ids by a keyed hash at ingest, so that the
// store, the snapshots, the events and the exports never hold the ids as
// they came. The same key always gives the same pseudonym for an id;
// without the key a pseudonym cannot be computed from a guessed id. Not
// safe for concurrent use.
type Pseudonymizer struct {
	key   []byte
	mac   hash.Hash
	keyID []byte
	sum   []byte
	out   []byte
}

// NewPseudonymizer returns a pseudonymizer with the given key (at least
// MinKeyBytes bytes; 32 random bytes are what HMAC-SHA-256 can use).
func NewPseudonymizer(key []byte) (*Pseudonymizer, error) {
	if len(key) < MinKeyBytes {
		return nil, fmt.Errorf("%w: %d bytes, want at least %d (for example 32 bytes from /dev/urandom)", ErrBadKey, len(key), MinKeyBytes)
	}
	p := &Pseudonymizer{key: append([]byte(nil), key...), mac: hmac.New(sha256.New, key)}
	// The key id is the HMAC of a fixed label: it tells keys apart without
	// revealing them, and is stored so a store is never fed two keys.
	p.mac.Write([]byte("shoal pseudonymisation key id"))
	p.keyID = p.mac.Sum(nil)[:8]
	p.mac.Reset()
	return p, nil
}

// ReadKeyFile reads a key file: its bytes, less one trailing newline (so
// that a key written by an editor or echo works).
func ReadKeyFile(path string) ([]byte, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("ingest: pseudonymisation key: %w", err)
	}
	b = bytes.TrimSuffix(b, []byte("\n"))
	b = bytes.TrimSuffix(b, []byte("\r"))
	return b, nil
}

// clone returns an independent pseudonymizer with the same key.
func (p *Pseudonymizer) clone() *Pseudonymizer {
	q, _ := NewPseudonymizer(p.key)
	return q
}

// KeyID returns the key's fingerprint (8 bytes), recorded in the store.
func (p *Pseudonymizer) KeyID() []byte { return p.keyID }

// ID returns the pseudonym of id.
func (p *Pseudonymizer) ID(id string) string {
	p.mac.Reset()
	p.mac.Write([]byte(id))
	p.sum = p.mac.Sum(p.sum[:0])
	n := pseudonymEncoding.EncodedLen(PseudonymBytes)
	if cap(p.out) < n {
		p.out = make([]byte, n)
	}
	p.out = p.out[:n]
	pseudonymEncoding.Encode(p.out, p.sum[:PseudonymBytes])
	return string(p.out)
}

// Apply replaces the ids of ev by their pseudonyms.
func (p *Pseudonymizer) Apply(ev *Event) {
	ev.Src = p.ID(ev.Src)
	if ev.Dst != "" {
		ev.Dst = p.ID(ev.Dst)
	}
}
