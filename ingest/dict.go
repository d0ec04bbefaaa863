package ingest

import (
	"encoding/binary"
	"hash/maphash"
	"math"
)

// Dict interns external string ids as dense uint32 ids 0, 1, 2, ... in the
// order they are first added, and maps them back. The ids do not depend on
// hashing: the same sequence of additions always gives the same ids.
//
// Memory: every name is stored once, in one byte slab (a uvarint length,
// then the bytes), with a uint32 offset per id for Name; the index is an
// open-addressing table of 16-byte slots (64-bit hash, slab offset, id)
// kept at most 3/4 full. That is about 25-45 bytes per id plus the name,
// against a string header, a separate allocation and a map entry per name
// for a map[string]uint32 plus []string. A lookup touches one slot and the
// name's bytes: two cache misses at most on a big dictionary.
//
// Capacity: 2^32-2 ids and 4 GiB of slab in all; ID panics beyond that. A
// Dict is not safe for concurrent use.
type Dict struct {
	slab  []byte
	offs  []uint32 // name i starts (with its length) at slab[offs[i]]
	slots []dictSlot
	shift uint // slot index = hash >> shift
	seed  maphash.Seed
}

// dictSlot is one index entry; id1 is the id + 1, 0 for an empty slot.
type dictSlot struct {
	hash uint64
	off  uint32
	id1  uint32
}

const dictMinSlots = 64

// NewDict returns an empty Dict.
func NewDict() *Dict {
	return &Dict{slots: make([]dictSlot, dictMinSlots), shift: 64 - 6, seed: maphash.MakeSeed()}
}

// Len returns the number of names.
func (d *Dict) Len() int { return len(d.offs) }

// ID returns the id of name, adding it if absent.
func (d *Dict) ID(name string) uint32 {
	id, ok := idHashed(d, name, maphash.String(d.seed, name)|1)
	if !ok {
		panic("ingest: Dict full")
	}
	return id
}

// Lookup returns the id of name and whether it is present.
func (d *Dict) Lookup(name string) (uint32, bool) {
	return lookupHashed(d, name, maphash.String(d.seed, name)|1)
}

// Name returns the name of id. It panics if id >= Len().
func (d *Dict) Name(id uint32) string {
	return string(d.name(id))
}

// AppendName appends the name of id to dst, without allocating a string.
// It panics if id >= Len().
func (d *Dict) AppendName(dst []byte, id uint32) []byte {
	return append(dst, d.name(id)...)
}

func (d *Dict) name(id uint32) []byte {
	if int(id) >= len(d.offs) {
		panic("ingest: Dict.Name: id out of range")
	}
	return d.at(d.offs[id])
}

// at returns the name stored at slab offset off.
func (d *Dict) at(off uint32) []byte {
	n, k := binary.Uvarint(d.slab[off:])
	start := uint64(off) + uint64(k)
	return d.slab[start : start+n]
}

// hash is the index hash of name. It is never 0, which callers use to
// mean "no hash".
func (d *Dict) hash(name []byte) uint64 {
	return maphash.Bytes(d.seed, name) | 1
}

// idBytes is ID for a byte slice; ok is false when the Dict is full.
func (d *Dict) idBytes(name []byte) (uint32, bool) {
	return idHashed(d, name, d.hash(name))
}

func (d *Dict) lookupBytes(name []byte) (uint32, bool) {
	return lookupHashed(d, name, d.hash(name))
}

// find returns the slot holding name (hash h), or the empty slot where it
// would go.
func find[T string | []byte](d *Dict, name T, h uint64) *dictSlot {
	mask := uint64(len(d.slots) - 1)
	for i := h >> d.shift; ; i = (i + 1) & mask {
		s := &d.slots[i]
		if s.id1 == 0 || (s.hash == h && string(d.at(s.off)) == string(name)) {
			return s
		}
	}
}

// lookupHashed finds name whose hash is h. Tests call it with forged
// hashes to exercise collisions.
func lookupHashed[T string | []byte](d *Dict, name T, h uint64) (uint32, bool) {
	s := find(d, name, h)
	if s.id1 == 0 {
		return 0, false
	}
	return s.id1 - 1, true
}

// idHashed returns the id of name whose hash is h, adding it if absent; ok
// is false when the Dict is full.
func idHashed[T string | []byte](d *Dict, name T, h uint64) (uint32, bool) {
	s := find(d, name, h)
	if s.id1 != 0 {
		return s.id1 - 1, true
	}
	n := len(d.offs)
	off := len(d.slab)
	if n >= math.MaxUint32-1 || uint64(off)+binary.MaxVarintLen16+uint64(len(name)) > math.MaxUint32 {
		return 0, false
	}
	d.slab = binary.AppendUvarint(d.slab, uint64(len(name)))
	d.slab = append(d.slab, name...)
	d.offs = append(d.offs, uint32(off))
	*s = dictSlot{hash: h, off: uint32(off), id1: uint32(n) + 1}
	if 4*(n+1) > 3*len(d.slots) {
		d.grow()
	}
	return uint32(n), true
}

// grow doubles the index, re-placing the slots by their stored hashes.
func (d *Dict) grow() {
	old := d.slots
	d.slots = make([]dictSlot, 2*len(old))
	d.shift--
	mask := uint64(len(d.slots) - 1)
	for _, s := range old {
		if s.id1 == 0 {
			continue
		}
		i := s.hash >> d.shift
		for d.slots[i].id1 != 0 {
			i = (i + 1) & mask
		}
		d.slots[i] = s
	}
}
