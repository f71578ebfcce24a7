// Package loggercsv writes simulated logger readings as a logger CSV file:
// a header line "time,<channel>,...", a unit line "unit,<unit>,...", then one
// row per time step with the time in RFC 3339 with nanoseconds (UTC) and one
// raw value per channel. A channel without a good reading in a step leaves
// its cell empty; a NaN defect is written as NaN.
package loggercsv

import (
	"bufio"
	"compress/gzip"
	"fmt"
	"io"
	"iter"
	"math"
	"strconv"
	"time"

	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
)

// Column is one channel column of the file.
type Column struct {
	// Channel is the channel id.
	Channel string
	// Unit is the unit of its raw values.
	Unit string
}

// Writer writes the rows of a logger CSV file.
type Writer struct {
	w      *bufio.Writer
	cols   []Column
	index  map[string]int
	cells  []string
	digits int
	rows   int
}

// NewWriter writes the two header lines for cols and returns a writer for
// the rows. digits is the number of significant digits of each value (0 means
// 8, enough below any gauge's noise).
func NewWriter(w io.Writer, cols []Column, digits int) (*Writer, error) {
	if digits <= 0 {
		digits = 8
	}
	cw := &Writer{w: bufio.NewWriterSize(w, 64<<10), cols: cols, index: make(map[string]int, len(cols)), cells: make([]string, len(cols)), digits: digits}
	cw.w.WriteString("time")
	for i, c := range cols {
		if _, dup := cw.index[c.Channel]; dup {
			return nil, fmt.Errorf("loggercsv: channel %q appears twice in the columns", c.Channel)
		}
		cw.index[c.Channel] = i
		cw.w.WriteByte(',')
		cw.w.WriteString(c.Channel)
	}
	cw.w.WriteString("\nunit")
	for _, c := range cols {
		cw.w.WriteByte(',')
		cw.w.WriteString(c.Unit)
	}
	cw.w.WriteByte('\n')
	return cw, nil
}

// Write writes one step as a row. Good readings fill their channel's cell; a
// NaN defect on a known channel writes NaN; other bad messages (malformed,
// unknown channel, wrong unit) cannot be carried by the file and leave the
// cell empty.
func (cw *Writer) Write(st simulate.Step) error {
	for i := range cw.cells {
		cw.cells[i] = ""
	}
	for _, r := range st.Readings {
		i, ok := cw.index[r.Channel]
		if !ok {
			return fmt.Errorf("loggercsv: step %s: channel %q has no column", st.Time.Format(time.RFC3339Nano), r.Channel)
		}
		cw.cells[i] = strconv.FormatFloat(r.Value, 'g', cw.digits, 64)
	}
	for _, r := range st.Bad {
		if i, ok := cw.index[r.Channel]; ok && r.Defect == simulate.DefectNaN && math.IsNaN(r.Value) {
			cw.cells[i] = "NaN"
		}
	}
	cw.w.WriteString(st.Time.UTC().Format(time.RFC3339Nano))
	for _, c := range cw.cells {
		cw.w.WriteByte(',')
		cw.w.WriteString(c)
	}
	if err := cw.w.WriteByte('\n'); err != nil {
		return fmt.Errorf("loggercsv: writing row %d: %w", cw.rows+1, err)
	}
	cw.rows++
	return nil
}

// Flush writes any buffered rows to the underlying writer.
func (cw *Writer) Flush() error {
	if err := cw.w.Flush(); err != nil {
		return fmt.Errorf("loggercsv: %w", err)
	}
	return nil
}

// WriteAll writes the header and every step of steps, then flushes.
func WriteAll(w io.Writer, cols []Column, digits int, steps iter.Seq2[simulate.Step, error]) (int, error) {
	cw, err := NewWriter(w, cols, digits)
	if err != nil {
		return 0, err
	}
	for st, err := range steps {
		if err != nil {
			return cw.rows, fmt.Errorf("loggercsv: simulator: %w", err)
		}
		if err := cw.Write(st); err != nil {
			return cw.rows, err
		}
	}
	return cw.rows, cw.Flush()
}

// WriteGzip is WriteAll into a gzip stream (best compression, no name and no
// time in the gzip header, so the same steps give the same bytes).
func WriteGzip(w io.Writer, cols []Column, digits int, steps iter.Seq2[simulate.Step, error]) (int, error) {
	zw, err := gzip.NewWriterLevel(w, gzip.BestCompression)
	if err != nil {
		return 0, fmt.Errorf("loggercsv: %w", err)
	}
	n, err := WriteAll(zw, cols, digits, steps)
	if err != nil {
		return n, err
	}
	if err := zw.Close(); err != nil {
		return n, fmt.Errorf("loggercsv: gzip: %w", err)
	}
	return n, nil
}

// ColumnsOf returns the columns for the channels of a sensor map, in order.
func ColumnsOf(chs []sensors.Channel) []Column {
	cols := make([]Column, len(chs))
	for i, c := range chs {
		cols[i] = Column{Channel: c.ID, Unit: c.Unit}
	}
	return cols
}
