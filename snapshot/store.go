package snapshot

import (
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"math"

	"github.com/cockroachdb/pebble/v2"

	"shoal/tracker"
)

// ErrNotFound is returned (wrapped) when a snapshot does not exist.
var ErrNotFound = errors.New("snapshot: not found")

// ErrCorrupt marks errors about bytes in the store that are wrong:
// truncated values, an unknown format version, a bad checksum, records that
// disagree with their header. Test with [IsCorrupt] or errors.Is.
var ErrCorrupt = errors.New("snapshot: corrupt record")

// IsCorrupt reports whether err is about bytes in the store that are wrong.
func IsCorrupt(err error) bool { return errors.Is(err, ErrCorrupt) }

type corruptError struct{ msg string }

func (e *corruptError) Error() string        { return e.msg }
func (e *corruptError) Is(target error) bool { return target == ErrCorrupt }

func corruptf(format string, args ...any) error {
	return &corruptError{msg: fmt.Sprintf(format, args...)}
}

const (
	// Prefix is the key-family byte of snapshots in the store.
	Prefix byte = 's'
	// FormatVersion is the version byte that starts every value.
	FormatVersion byte = 1

	recHeader    byte = 0x00
	recCommunity byte = 0x01

	headerKeyLen    = 1 + 8 + 1
	communityKeyLen = 1 + 8 + 1 + 8
	crcLen          = 4
)

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

func crcOf(b []byte) uint32 { return crc32.Checksum(b, castagnoli) }

func appendSnapshotStart(dst []byte, id uint64) []byte {
	dst = append(dst, Prefix)
	return binary.BigEndian.AppendUint64(dst, id)
}

// snapshotEnd is the exclusive upper bound of the keys of snapshot id.
func snapshotEnd(id uint64) []byte {
	if id == math.MaxUint64 {
		return []byte{Prefix + 1}
	}
	return appendSnapshotStart(nil, id+1)
}

func headerKey(id uint64) []byte {
	return append(appendSnapshotStart(make([]byte, 0, headerKeyLen), id), recHeader)
}

func appendCommunityKey(dst []byte, id, cid uint64) []byte {
	dst = append(appendSnapshotStart(dst, id), recCommunity)
	return binary.BigEndian.AppendUint64(dst, cid)
}

// Write adds s to the batch: first a range delete over any earlier records
// of the same snapshot id (so a retried write leaves no stale records), then
// the header and one record per community. Nothing is stored until the
// caller commits b, which lets a snapshot and its events commit atomically.
// s must be consistent (as [Freeze] makes it): communities sorted by id,
// sizes equal to the member counts, members strictly increasing, header
// counts equal to the data.
func Write(b *pebble.Batch, s *Snapshot) error {
	if err := check(s); err != nil {
		return fmt.Errorf("snapshot: write %d: %w", s.ID, err)
	}
	if err := b.DeleteRange(appendSnapshotStart(nil, s.ID), snapshotEnd(s.ID), nil); err != nil {
		return fmt.Errorf("snapshot: write %d: %w", s.ID, err)
	}
	if err := b.Set(headerKey(s.ID), encodeHeader(nil, &s.Header), nil); err != nil {
		return fmt.Errorf("snapshot: write %d: header: %w", s.ID, err)
	}
	var key, val []byte
	for i := range s.Communities {
		c := &s.Communities[i]
		key = appendCommunityKey(key[:0], s.ID, c.ID)
		val = encodeCommunity(val[:0], c)
		if err := b.Set(key, val, nil); err != nil {
			return fmt.Errorf("snapshot: write %d: community %d: %w", s.ID, c.ID, err)
		}
	}
	return nil
}

func check(s *Snapshot) error {
	if s.Header.Communities != len(s.Communities) {
		return fmt.Errorf("%w: header counts %d communities, snapshot has %d", ErrInvalid, s.Header.Communities, len(s.Communities))
	}
	nodes := 0
	for i := range s.Communities {
		c := &s.Communities[i]
		if i > 0 && c.ID <= s.Communities[i-1].ID {
			return fmt.Errorf("%w: community ids not increasing at %d", ErrInvalid, c.ID)
		}
		if c.Size != len(c.Members) || c.Size == 0 {
			return fmt.Errorf("%w: community %d: size %d, %d members", ErrInvalid, c.ID, c.Size, len(c.Members))
		}
		for j := 1; j < len(c.Members); j++ {
			if c.Members[j] <= c.Members[j-1] {
				return fmt.Errorf("%w: community %d: members not increasing", ErrInvalid, c.ID)
			}
		}
		for j := 1; j < len(c.Hubs); j++ {
			if c.Hubs[j] <= c.Hubs[j-1] {
				return fmt.Errorf("%w: community %d: hubs not increasing", ErrInvalid, c.ID)
			}
		}
		nodes += c.Size
	}
	if nodes != s.Nodes {
		return fmt.Errorf("%w: header counts %d nodes, communities hold %d", ErrInvalid, s.Nodes, nodes)
	}
	return nil
}

// Load reads snapshot id. It returns an error wrapping [ErrNotFound] if there
// is no such snapshot, and one for which [IsCorrupt] holds if its records are
// wrong.
func Load(r pebble.Reader, id uint64) (*Snapshot, error) {
	val, closer, err := r.Get(headerKey(id))
	if errors.Is(err, pebble.ErrNotFound) {
		return nil, fmt.Errorf("snapshot: load %d: %w", id, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("snapshot: load %d: %w", id, err)
	}
	h, err := decodeHeader(val)
	closer.Close()
	if err != nil {
		return nil, fmt.Errorf("snapshot: load %d: header: %w", id, err)
	}
	if h.ID != id {
		return nil, corruptf("snapshot: load %d: header holds id %d", id, h.ID)
	}
	s := &Snapshot{Header: h}

	lower := appendCommunityKey(nil, id, 0)
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: lower, UpperBound: snapshotEnd(id)})
	if err != nil {
		return nil, fmt.Errorf("snapshot: load %d: %w", id, err)
	}
	// Capacity hints only; a wrong header is caught by the count checks.
	s.Communities = make([]Community, 0, min(h.Communities, 1<<20))
	slab := make([]uint32, 0, min(h.Nodes, 1<<26))
	offs := make([]int, 0, min(h.Communities, 1<<20))
	for valid := it.First(); valid; valid = it.Next() {
		key := it.Key()
		if len(key) != communityKeyLen {
			it.Close()
			return nil, corruptf("snapshot: load %d: community key of %d bytes", id, len(key))
		}
		cid := binary.BigEndian.Uint64(key[headerKeyLen:])
		v, err := it.ValueAndErr()
		if err != nil {
			it.Close()
			return nil, fmt.Errorf("snapshot: load %d: community %d: %w", id, cid, err)
		}
		offs = append(offs, len(slab))
		var c Community
		c, slab, err = decodeCommunity(v, slab)
		if err != nil {
			it.Close()
			return nil, fmt.Errorf("snapshot: load %d: community %d: %w", id, cid, err)
		}
		if c.ID != cid {
			it.Close()
			return nil, corruptf("snapshot: load %d: community key %d holds id %d", id, cid, c.ID)
		}
		s.Communities = append(s.Communities, c)
	}
	if err := it.Close(); err != nil {
		return nil, fmt.Errorf("snapshot: load %d: %w", id, err)
	}
	offs = append(offs, len(slab))
	for i := range s.Communities {
		s.Communities[i].Members = slab[offs[i]:offs[i+1]:offs[i+1]]
	}
	if len(s.Communities) != h.Communities || len(slab) != h.Nodes {
		return nil, corruptf("snapshot: load %d: header counts %d communities and %d nodes, records hold %d and %d",
			id, h.Communities, h.Nodes, len(s.Communities), len(slab))
	}
	return s, nil
}

// List returns the headers of all stored snapshots in increasing id order.
// It seeks past the community records of each snapshot, so its cost grows
// with the number of snapshots, not their size.
func List(r pebble.Reader) ([]Header, error) {
	var out []Header
	err := scanHeaders(r, func(id uint64, key, val []byte) error {
		if len(key) != headerKeyLen || key[headerKeyLen-1] != recHeader {
			return corruptf("snapshot: list: snapshot %d has no header record", id)
		}
		h, err := decodeHeader(val)
		if err != nil {
			return fmt.Errorf("snapshot: list: header %d: %w", id, err)
		}
		if h.ID != id {
			return corruptf("snapshot: list: header key %d holds id %d", id, h.ID)
		}
		out = append(out, h)
		return nil
	})
	return out, err
}

// scanHeaders calls fn with the first key (and its value) of every snapshot
// id in the family, in order.
func scanHeaders(r pebble.Reader, fn func(id uint64, key, val []byte) error) error {
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: []byte{Prefix}, UpperBound: []byte{Prefix + 1}})
	if err != nil {
		return fmt.Errorf("snapshot: list: %w", err)
	}
	for valid := it.First(); valid; {
		key := it.Key()
		if len(key) < 1+8 {
			it.Close()
			return corruptf("snapshot: list: key of %d bytes", len(key))
		}
		id := binary.BigEndian.Uint64(key[1:9])
		val, err := it.ValueAndErr()
		if err == nil {
			err = fn(id, key, val)
		}
		if err != nil {
			it.Close()
			return err
		}
		if id == math.MaxUint64 {
			break
		}
		valid = it.SeekGE(appendSnapshotStart(nil, id+1))
	}
	if err := it.Close(); err != nil {
		return fmt.Errorf("snapshot: list: %w", err)
	}
	return nil
}

// Latest loads the snapshot with the largest id, or returns an error
// wrapping [ErrNotFound] if there is none.
func Latest(r pebble.Reader) (*Snapshot, error) {
	it, err := r.NewIter(&pebble.IterOptions{LowerBound: []byte{Prefix}, UpperBound: []byte{Prefix + 1}})
	if err != nil {
		return nil, fmt.Errorf("snapshot: latest: %w", err)
	}
	if !it.Last() {
		if err := it.Close(); err != nil {
			return nil, fmt.Errorf("snapshot: latest: %w", err)
		}
		return nil, fmt.Errorf("snapshot: latest: %w", ErrNotFound)
	}
	key := it.Key()
	if len(key) < 1+8 {
		it.Close()
		return nil, corruptf("snapshot: latest: key of %d bytes", len(key))
	}
	id := binary.BigEndian.Uint64(key[1:9])
	if err := it.Close(); err != nil {
		return nil, fmt.Errorf("snapshot: latest: %w", err)
	}
	s, err := Load(r, id)
	if errors.Is(err, ErrNotFound) {
		// Records of snapshot id exist but its header does not.
		return nil, corruptf("snapshot: latest: snapshot %d has no header record", id)
	}
	return s, err
}

// Retain adds to b one range delete that removes all but the keep snapshots
// with the largest ids visible in r, and returns how many it removes. It
// reads only keys, so corrupt old snapshots can still be removed. A snapshot
// written into b but not yet visible in r is not counted (pass an indexed
// batch as r to count it). keep must be at least 1.
func Retain(b *pebble.Batch, r pebble.Reader, keep int) (deleted int, err error) {
	if keep < 1 {
		return 0, fmt.Errorf("snapshot: retain: keep %d: %w (must be at least 1)", keep, ErrInvalid)
	}
	var ids []uint64
	if err := scanHeaders(r, func(id uint64, _, _ []byte) error {
		ids = append(ids, id)
		return nil
	}); err != nil {
		return 0, fmt.Errorf("snapshot: retain: %w", err)
	}
	if len(ids) <= keep {
		return 0, nil
	}
	n := len(ids) - keep
	if err := b.DeleteRange(appendSnapshotStart(nil, ids[0]), appendSnapshotStart(nil, ids[n]), nil); err != nil {
		return 0, fmt.Errorf("snapshot: retain: %w", err)
	}
	return n, nil
}

// Value layouts (version 1); see doc.go.

func encodeHeader(dst []byte, h *Header) []byte {
	dst = append(dst, FormatVersion)
	dst = binary.AppendUvarint(dst, h.ID)
	dst = binary.AppendUvarint(dst, uint64(len(h.Graph)))
	dst = append(dst, h.Graph...)
	dst = binary.AppendUvarint(dst, h.Seq)
	dst = binary.AppendVarint(dst, h.Watermark)
	dst = binary.AppendVarint(dst, h.Time)
	dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(h.Modularity))
	dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(h.Gamma))
	dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(h.TotalWeight))
	dst = binary.AppendUvarint(dst, uint64(h.Nodes))
	dst = binary.AppendUvarint(dst, uint64(h.Edges))
	dst = binary.AppendUvarint(dst, uint64(h.Communities))
	// Added later, at the end and only for an objective other than
	// modularity, so that older headers still decode (as modularity,
	// quality = modularity) and every header has one encoding.
	if h.Objective != tracker.ObjectiveModularity {
		dst = append(dst, byte(h.Objective))
		dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(h.Quality))
	}
	return binary.BigEndian.AppendUint32(dst, crcOf(dst))
}

func encodeCommunity(dst []byte, c *Community) []byte {
	dst = append(dst, FormatVersion)
	dst = binary.AppendUvarint(dst, c.ID)
	dst = binary.AppendUvarint(dst, uint64(len(c.Members)))
	for _, f := range [...]float64{c.Internal, c.Degree, c.Density, c.Conductance} {
		dst = binary.BigEndian.AppendUint64(dst, math.Float64bits(f))
	}
	prev := uint32(0)
	for i, m := range c.Members {
		if i == 0 {
			dst = binary.AppendUvarint(dst, uint64(m))
		} else {
			dst = binary.AppendUvarint(dst, uint64(m-prev))
		}
		prev = m
	}
	// Added later, at the end and only when there are hubs, so that older
	// records still decode (as no hubs) and every record has one encoding.
	if len(c.Hubs) > 0 {
		dst = binary.AppendUvarint(dst, uint64(len(c.Hubs)))
		dst = appendGaps(dst, c.Hubs)
	}
	return binary.BigEndian.AppendUint32(dst, crcOf(dst))
}

// appendGaps appends ids (strictly increasing) as the first one and then
// the gaps to the previous one.
func appendGaps(dst []byte, ids []uint32) []byte {
	prev := uint32(0)
	for i, m := range ids {
		if i == 0 {
			dst = binary.AppendUvarint(dst, uint64(m))
		} else {
			dst = binary.AppendUvarint(dst, uint64(m-prev))
		}
		prev = m
	}
	return dst
}

// body checks the version byte and the checksum and returns the bytes
// between them.
func body(val []byte) ([]byte, error) {
	if len(val) < 1+crcLen {
		return nil, corruptf("snapshot: value of %d bytes is truncated", len(val))
	}
	if val[0] != FormatVersion {
		return nil, corruptf("snapshot: unknown format version %d", val[0])
	}
	n := len(val) - crcLen
	if got, want := crcOf(val[:n]), binary.BigEndian.Uint32(val[n:]); got != want {
		return nil, corruptf("snapshot: checksum mismatch (%08x, stored %08x)", got, want)
	}
	return val[1:n], nil
}

// decoder reads fields from a value body; the first failure sticks.
type decoder struct {
	buf []byte
	err error
}

func (d *decoder) fail(what string) {
	if d.err == nil {
		d.err = corruptf("snapshot: %s", what)
	}
}

func (d *decoder) uvarint(what string) uint64 {
	if d.err != nil {
		return 0
	}
	x, n := binary.Uvarint(d.buf)
	if n <= 0 || n != uvarintLen(x) {
		// Only the shortest encoding is valid, so a value has one form.
		d.fail("truncated or overlong " + what)
		return 0
	}
	d.buf = d.buf[n:]
	return x
}

func (d *decoder) varint(what string) int64 {
	if d.err != nil {
		return 0
	}
	x, n := binary.Varint(d.buf)
	if n <= 0 || n != varintLen(x) {
		d.fail("truncated or overlong " + what)
		return 0
	}
	d.buf = d.buf[n:]
	return x
}

func uvarintLen(x uint64) int {
	n := 1
	for x >= 0x80 {
		x >>= 7
		n++
	}
	return n
}

func varintLen(x int64) int {
	ux := uint64(x) << 1
	if x < 0 {
		ux = ^ux
	}
	return uvarintLen(ux)
}

func (d *decoder) count(what string) int {
	x := d.uvarint(what)
	if x > math.MaxInt32 {
		d.fail(what + " out of range")
		return 0
	}
	return int(x)
}

func (d *decoder) float(what string, finiteOnly bool) float64 {
	if d.err != nil {
		return 0
	}
	if len(d.buf) < 8 {
		d.fail("truncated " + what)
		return 0
	}
	f := math.Float64frombits(binary.BigEndian.Uint64(d.buf))
	d.buf = d.buf[8:]
	if finiteOnly && !finite(f) {
		d.fail(what + " is not finite")
	}
	return f
}

func (d *decoder) done() error {
	if d.err == nil && len(d.buf) != 0 {
		d.fail(fmt.Sprintf("%d trailing bytes", len(d.buf)))
	}
	return d.err
}

func decodeHeader(val []byte) (Header, error) {
	b, err := body(val)
	if err != nil {
		return Header{}, err
	}
	return decodeHeaderBody(b)
}

func decodeHeaderBody(b []byte) (Header, error) {
	d := decoder{buf: b}
	var h Header
	h.ID = d.uvarint("id")
	n := d.uvarint("graph name length")
	if d.err == nil {
		if n > uint64(len(d.buf)) {
			d.fail("truncated graph name")
		} else {
			h.Graph = string(d.buf[:n])
			d.buf = d.buf[n:]
		}
	}
	h.Seq = d.uvarint("sequence")
	h.Watermark = d.varint("watermark")
	h.Time = d.varint("time")
	h.Modularity = d.float("modularity", false)
	h.Gamma = d.float("gamma", false)
	h.TotalWeight = d.float("total weight", false)
	h.Nodes = d.count("node count")
	h.Edges = d.count("edge count")
	h.Communities = d.count("community count")
	h.Quality = h.Modularity
	if d.err == nil && len(d.buf) > 0 {
		obj := d.buf[0]
		d.buf = d.buf[1:]
		if obj == byte(tracker.ObjectiveModularity) || obj > byte(tracker.ObjectiveCPM) {
			d.fail(fmt.Sprintf("objective %d after the counts", obj))
		}
		h.Objective = tracker.Objective(obj)
		h.Quality = d.float("quality", false)
	}
	if err := d.done(); err != nil {
		return Header{}, err
	}
	return h, nil
}

// decodeCommunity decodes a community value and appends its members to
// slab; Members of the result is left nil (the caller slices the slab).
func decodeCommunity(val []byte, slab []uint32) (Community, []uint32, error) {
	b, err := body(val)
	if err != nil {
		return Community{}, slab, err
	}
	return decodeCommunityBody(b, slab)
}

func decodeCommunityBody(b []byte, slab []uint32) (Community, []uint32, error) {
	d := decoder{buf: b}
	var c Community
	c.ID = d.uvarint("community id")
	c.Size = d.count("size")
	c.Internal = d.float("internal weight", true)
	c.Degree = d.float("degree", true)
	c.Density = d.float("density", true)
	c.Conductance = d.float("conductance", true)
	if d.err == nil && (c.Size == 0 || c.Size > len(d.buf)) {
		// Each member takes at least one byte.
		d.fail(fmt.Sprintf("size %d with %d member bytes", c.Size, len(d.buf)))
	}
	if d.err != nil {
		return Community{}, slab, d.err
	}
	prev := uint64(0)
	for i := 0; i < c.Size; i++ {
		x := d.uvarint("member")
		if d.err != nil {
			break
		}
		if i > 0 {
			if x == 0 {
				d.fail("members not increasing")
				break
			}
			x += prev
		}
		if x > math.MaxUint32 || x < prev {
			d.fail("member id out of range")
			break
		}
		slab = append(slab, uint32(x))
		prev = x
	}
	if d.err == nil && len(d.buf) > 0 {
		c.Hubs = d.gaps("hub")
	}
	if err := d.done(); err != nil {
		return Community{}, slab, err
	}
	return c, slab, nil
}

// gaps reads a count (at least 1, at most one per remaining byte) and as
// many strictly increasing ids written by appendGaps.
func (d *decoder) gaps(what string) []uint32 {
	n := d.count(what + " count")
	if d.err == nil && (n == 0 || n > len(d.buf)) {
		d.fail(fmt.Sprintf("%d %ss with %d bytes", n, what, len(d.buf)))
	}
	if d.err != nil {
		return nil
	}
	out := make([]uint32, 0, n)
	prev := uint64(0)
	for i := 0; i < n; i++ {
		x := d.uvarint(what)
		if d.err != nil {
			return nil
		}
		if i > 0 {
			if x == 0 {
				d.fail(what + "s not increasing")
				return nil
			}
			x += prev
		}
		if x > math.MaxUint32 || x < prev {
			d.fail(what + " id out of range")
			return nil
		}
		out = append(out, uint32(x))
		prev = x
	}
	return out
}
