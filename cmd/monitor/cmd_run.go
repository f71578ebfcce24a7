package main

import (
	"context"
	"fmt"
	"io"
)

// runService is not built yet; the owner of this command replaces this file.
func runService(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "monitor run: not built yet")
	return 2
}
