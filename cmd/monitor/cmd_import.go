package main

import (
	"context"
	"fmt"
	"io"
)

// runImport is not built yet; the owner of this command replaces this file.
func runImport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "monitor import: not built yet")
	return 2
}
