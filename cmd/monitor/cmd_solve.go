package main

import (
	"context"
	"fmt"
	"io"
)

// runSolve is not built yet; the owner of this command replaces this file.
func runSolve(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "monitor solve: not built yet")
	return 2
}
