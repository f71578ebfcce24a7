package main

import (
	"context"
	"fmt"
	"io"
)

// runReplay is not built yet; the owner of this command replaces this file.
func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "monitor replay: not built yet")
	return 2
}
