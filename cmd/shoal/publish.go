package main

import (
	"context"
	"errors"
)

func runPublish(ctx context.Context, e *env, args []string) error {
	return errors.New("not built yet")
}
