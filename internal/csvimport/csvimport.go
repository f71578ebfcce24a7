// Package csvimport reads logger CSV files (Read) and stores their
// readings as MQTT ingest would (Importer): one row per logger scan, a
// timestamp in the first column and one column per channel.
//
// The format (see docs/payloads.md):
//
//	# lines starting with '#' are comments (anywhere in the file)
//	time,B2_a,B2_b,pad_1,temp_top
//	unit,/,/,N,Cel                        <- optional unit row
//	2026-12-02T01:00:00Z,1.25e-4,1.19e-4,1503,14.9
//	1796173200.5,1.26e-4,,1498,14.9       <- Unix seconds; empty cell: no reading
//
// The header's first cell is "time"; the others are channel ids (characters
// A-Z a-z 0-9 - : . _, starting with a letter or digit; each at most once).
// An optional second row whose first cell is "unit" gives each column's
// SenML unit. Timestamps are RFC 3339 (with a zone or "Z"; fractions of a
// second allowed) or Unix seconds with up to nine decimals. Values are
// decimal numbers; an empty cell means the channel did not report in that
// scan. Every row has as many cells as the header.
package csvimport

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"
)

// Record is one reading from the file.
type Record struct {
	// Line is the line of the row in the file (1-based).
	Line int
	// Channel is the column's channel id, Unit its unit ("" without a
	// unit row).
	Channel, Unit string
	Time          time.Time
	Value         float64
}

// Stats counts what Read saw.
type Stats struct {
	// Rows is the number of data rows read.
	Rows int
	// Readings is the number of records passed to the callback.
	Readings int
	// Empty is the number of empty cells (no reading).
	Empty int
	// Channels is the number of channel columns.
	Channels int
}

// Error is a problem at a place in the file. Column is 1-based (0 when the
// whole line is concerned).
type Error struct {
	Line, Column int
	Channel      string
	Msg          string
	Err          error
}

// Error formats as "line L, column C (channel): message".
func (e *Error) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "line %d", e.Line)
	if e.Column > 0 {
		fmt.Fprintf(&b, ", column %d", e.Column)
	}
	if e.Channel != "" {
		fmt.Fprintf(&b, " (%s)", e.Channel)
	}
	b.WriteString(": ")
	b.WriteString(e.Msg)
	if e.Err != nil {
		b.WriteString(": ")
		b.WriteString(e.Err.Error())
	}
	return b.String()
}

// Unwrap returns the cause.
func (e *Error) Unwrap() error { return e.Err }

// Read streams the CSV from r and calls fn for every non-empty cell, in file
// order (row by row, left to right). It stops at the first error in the
// file (an *Error naming line and column) or the first error from fn (which
// it returns wrapped with the line and column). Records passed to fn before
// an error stay passed; Stats counts them.
func Read(r io.Reader, fn func(Record) error) (Stats, error) {
	var st Stats
	br := bufio.NewReader(r)
	if b, err := br.Peek(3); err == nil && string(b) == "\ufeff" {
		br.Discard(3) // byte-order mark written by some spreadsheet exports
	}
	cr := csv.NewReader(br)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1 // checked here, to name the line
	cr.ReuseRecord = true

	header, err := cr.Read()
	if err == io.EOF {
		return st, &Error{Line: 1, Msg: "empty file; expected a header line \"time,<channel>,...\""}
	}
	if err != nil {
		return st, csvError(err)
	}
	line, _ := cr.FieldPos(0)
	channels, err := parseHeader(header, line)
	if err != nil {
		return st, err
	}
	st.Channels = len(channels)
	unitsRow := make([]string, len(channels))

	first := true
	for {
		row, err := cr.Read()
		if err == io.EOF {
			return st, nil
		}
		if err != nil {
			return st, csvError(err)
		}
		line, _ := cr.FieldPos(0)
		if len(row) != len(channels)+1 {
			return st, &Error{Line: line, Msg: fmt.Sprintf("%d cells, but the header has %d; every row needs a cell per column (leave it empty for no reading)", len(row), len(channels)+1)}
		}
		if first && strings.TrimSpace(row[0]) == "unit" {
			first = false
			for i, u := range row[1:] {
				unitsRow[i] = strings.TrimSpace(u)
			}
			continue
		}
		first = false
		ts, err := parseTime(strings.TrimSpace(row[0]))
		if err != nil {
			return st, &Error{Line: line, Column: 1, Msg: "bad timestamp", Err: err}
		}
		st.Rows++
		for i, cell := range row[1:] {
			cell = strings.TrimSpace(cell)
			if cell == "" {
				st.Empty++
				continue
			}
			v, err := strconv.ParseFloat(cell, 64)
			if err != nil {
				var ne *strconv.NumError
				if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
					// Overflow: pass it on as ±Inf so that validation
					// counts it as not finite rather than losing the row.
					err = nil
				} else {
					return st, &Error{Line: line, Column: i + 2, Channel: channels[i], Msg: fmt.Sprintf("value %q is not a number", clip(cell))}
				}
			}
			rec := Record{Line: line, Channel: channels[i], Unit: unitsRow[i], Time: ts, Value: v}
			if err := fn(rec); err != nil {
				return st, &Error{Line: line, Column: i + 2, Channel: channels[i], Msg: "rejected", Err: err}
			}
			st.Readings++
		}
	}
}

func parseHeader(h []string, line int) ([]string, error) {
	if len(h) < 2 || strings.TrimSpace(h[0]) != "time" {
		return nil, &Error{Line: line, Column: 1, Msg: "the header must start with \"time\" followed by channel ids, e.g. time,B2_a,B2_b"}
	}
	seen := map[string]int{}
	out := make([]string, 0, len(h)-1)
	for i, c := range h[1:] {
		c = strings.TrimSpace(c)
		if !validChannel(c) {
			return nil, &Error{Line: line, Column: i + 2, Msg: fmt.Sprintf("channel id %q may use only A-Z a-z 0-9 - : . _ and must start with a letter or digit", clip(c))}
		}
		if j, dup := seen[c]; dup {
			return nil, &Error{Line: line, Column: i + 2, Channel: c, Msg: fmt.Sprintf("channel also in column %d; each channel once", j)}
		}
		seen[c] = i + 2
		out = append(out, c)
	}
	return out, nil
}

func validChannel(id string) bool {
	if id == "" || len(id) > 128 {
		return false
	}
	for i := 0; i < len(id); i++ {
		c := id[i]
		alnum := (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9')
		if !alnum && !(i > 0 && (c == '-' || c == ':' || c == '.' || c == '_')) {
			return false
		}
	}
	return true
}

// parseTime reads RFC 3339 or Unix seconds with up to nine decimals (parsed
// exactly, without going through float64).
func parseTime(s string) (time.Time, error) {
	if s == "" {
		return time.Time{}, errors.New("empty; give RFC 3339 (2026-12-02T01:00:00Z) or Unix seconds")
	}
	if strings.ContainsAny(s, "T:") {
		t, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			return time.Time{}, fmt.Errorf("%q is not RFC 3339 (e.g. 2026-12-02T01:00:00.250Z)", clip(s))
		}
		return t.UTC(), nil
	}
	whole, frac, _ := strings.Cut(s, ".")
	neg := strings.HasPrefix(whole, "-")
	sec, err := strconv.ParseInt(whole, 10, 64)
	if err != nil || len(frac) > 9 || strings.HasPrefix(whole, "+") {
		return time.Time{}, fmt.Errorf("%q is neither RFC 3339 nor Unix seconds with at most 9 decimals", clip(s))
	}
	var nanos int64
	if frac != "" {
		for _, c := range frac {
			if c < '0' || c > '9' {
				return time.Time{}, fmt.Errorf("%q is not a decimal number of seconds", clip(s))
			}
		}
		n, _ := strconv.ParseInt(frac+strings.Repeat("0", 9-len(frac)), 10, 64)
		nanos = n
		if neg {
			nanos = -nanos
		}
	}
	// A time the store cannot keep is refused by ingest.Admit (bad_time),
	// as for MQTT ingest, not here.
	return time.Unix(sec, nanos).UTC(), nil
}

func csvError(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &Error{Line: pe.Line, Column: pe.Column, Msg: "malformed CSV", Err: pe.Err}
	}
	return &Error{Msg: "reading the file", Err: err}
}

func clip(s string) string {
	if len(s) > 40 {
		return s[:40] + "..."
	}
	return s
}
