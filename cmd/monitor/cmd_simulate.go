package main

import (
	"context"
	"fmt"
	"io"
)

// runSimulate is not built yet; the owner of this command replaces this file.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "monitor simulate: not built yet")
	return 2
}
