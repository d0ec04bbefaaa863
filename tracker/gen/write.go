package gen

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
)

// WriteEdgeList writes the edges of g as "u<TAB>v\n" lines, in the order of
// g.Edges (sorted by (U, V)). Weights are all 1 and are not written. The
// plain edge-list form that shoal's readers accept (package ingest, doc.go,
// Formats).
func WriteEdgeList(w io.Writer, g *Graph) error {
	bw := bufio.NewWriterSize(w, 64<<10)
	var buf []byte
	for _, e := range g.Edges {
		buf = strconv.AppendUint(buf[:0], uint64(e.U), 10)
		buf = append(buf, '\t')
		buf = strconv.AppendUint(buf, uint64(e.V), 10)
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return fmt.Errorf("gen: write edge list: %w", err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("gen: write edge list: %w", err)
	}
	return nil
}

// WriteMembership writes the planted partition of g as "node<TAB>community\n"
// lines, one per node in id order.
func WriteMembership(w io.Writer, g *Graph) error {
	bw := bufio.NewWriterSize(w, 64<<10)
	var buf []byte
	for v, c := range g.Membership {
		buf = strconv.AppendUint(buf[:0], uint64(v), 10)
		buf = append(buf, '\t')
		buf = strconv.AppendUint(buf, uint64(c), 10)
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return fmt.Errorf("gen: write membership: %w", err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("gen: write membership: %w", err)
	}
	return nil
}
