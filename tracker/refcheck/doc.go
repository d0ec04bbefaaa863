// Package refcheck holds tests that check shoal's tracker, and the values
// in testdata/SOURCES.md, against independent reference libraries run as a
// subprocess (python3 with igraph and leidenalg). It has no code of its
// own: the tracker stays pure (tracker/doc.go), and its own tests do not
// start processes. The tests skip when no python3 imports both libraries;
// CI (.ci/run) installs Debian's python3-igraph and python3-leidenalg.
package refcheck
