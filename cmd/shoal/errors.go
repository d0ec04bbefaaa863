package main

import (
	"errors"

	"shoal/ingest"
)

// isUsage reports whether err is bad usage or bad input (exit code 2).
func isUsage(err error) bool {
	var u usageError
	var d *ingest.DecodeError
	return errors.As(err, &u) || errors.As(err, &d)
}
