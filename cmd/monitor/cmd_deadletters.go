package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"trussmonitor/internal/store"
)

// runDeadLetters implements "monitor deadletters --db FILE [--since T]
// [--reason R] [--limit N]": it lists the stored dead letters (rejected
// payloads and readings), oldest first, one line each: first receipt,
// repeats, reason, topic, payload size and excerpt, then the detail.
func runDeadLetters(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor deadletters", flag.ContinueOnError)
	fs.SetOutput(stderr)
	dbPath := fs.String("db", "", "reading store (SQLite file)")
	since := fs.String("since", "", "only dead letters first received at or after this time: RFC 3339 (2026-06-01T12:00:00Z) or a duration before now (24h)")
	reason := fs.String("reason", "", "only this reason code (README.md lists them), e.g. malformed_json")
	limit := fs.Int("limit", 1000, "at most this many dead letters (0: all)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor deadletters --db FILE [--since T] [--reason R] [--limit N]")
		fmt.Fprintln(stderr, "Lists the dead letters (rejected payloads and readings) in the store, oldest first.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	var problems []string
	if *dbPath == "" {
		problems = append(problems, "missing --db")
	}
	if fs.NArg() > 0 {
		problems = append(problems, fmt.Sprintf("unexpected argument %q (all inputs are flags)", fs.Arg(0)))
	}
	from, err := parseSince(*since, time.Now())
	if err != nil {
		problems = append(problems, err.Error())
	}
	if *limit < 0 {
		problems = append(problems, fmt.Sprintf("--limit %d: give 0 (all) or more", *limit))
	}
	if len(problems) > 0 {
		for _, p := range problems {
			fmt.Fprintf(stderr, "monitor deadletters: %s\n", p)
		}
		fs.Usage()
		return 2
	}
	if _, err := os.Stat(*dbPath); err != nil {
		fmt.Fprintf(stderr, "monitor deadletters: %v\n", err)
		return 1
	}
	db, err := store.Open(*dbPath, store.Options{})
	if err != nil {
		fmt.Fprintf(stderr, "monitor deadletters: %v\n", err)
		return 1
	}
	defer db.Close()
	ds, err := db.ListDeadLetters(ctx, store.DeadLetterFilter{From: from, Reason: *reason, Limit: *limit})
	if err != nil {
		fmt.Fprintf(stderr, "monitor deadletters: %v\n", err)
		return 1
	}
	var received int64
	for _, d := range ds {
		received += d.Repeats
		fmt.Fprintf(stdout, "%s  x%d  %s  %s  %d B  %s\n", d.Received.Format(time.RFC3339Nano), d.Repeats, d.Reason, d.Topic, d.Size, excerptText(d.Payload, 120))
		if d.Repeats > 1 {
			fmt.Fprintf(stdout, "    last received %s\n", d.LastReceived.Format(time.RFC3339Nano))
		}
		fmt.Fprintf(stdout, "    %s\n", d.Detail)
	}
	fmt.Fprintf(stdout, "%d dead letters (%d received)", len(ds), received)
	if *limit > 0 && len(ds) == *limit {
		fmt.Fprintf(stdout, "; the first %d shown, raise --limit or narrow --since/--reason for more", *limit)
	}
	fmt.Fprintln(stdout)
	return 0
}

// parseSince reads --since: RFC 3339, or a Go duration before now; ""
// is unbounded (the zero time).
func parseSince(s string, now time.Time) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t, nil
	}
	if d, err := time.ParseDuration(s); err == nil && d > 0 {
		return now.Add(-d), nil
	}
	return time.Time{}, fmt.Errorf("--since %q is neither an RFC 3339 time (2026-06-01T12:00:00Z) nor a positive duration (24h, 90m)", s)
}

// excerptText shows a payload excerpt on one line: Go-quoted (control
// characters and invalid UTF-8 escaped), cut to about n characters.
func excerptText(p []byte, n int) string {
	cut := false
	if utf8.RuneCount(p) > n {
		i := 0
		for k := 0; k < n; k++ {
			_, size := utf8.DecodeRune(p[i:])
			i += size
		}
		p, cut = p[:i], true
	}
	q := strconv.Quote(string(p))
	if cut {
		q = strings.TrimSuffix(q, `"`) + `..."`
	}
	return q
}
