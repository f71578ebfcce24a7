package main

import (
	"context"
	"fmt"
	"io"
)

// runDemo is not built yet; the owner of this command replaces this file.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "monitor demo: not built yet")
	return 2
}
