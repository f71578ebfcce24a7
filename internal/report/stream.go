package report

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
)

// Stream writes a report while its epochs arrive, in memory that does not
// grow with their number: each epoch's row goes to a temporary epochs.csv
// in the report folder at once, and the page keeps only bounded summaries
// (per pixel column the minimum, maximum, first and last time of each
// plotted line; counts and the largest |w| per member; the counts of the
// intervals between epochs). Finish writes events.csv, members.csv and
// index.html and puts epochs.csv in place; a reader never sees half a
// file.
//
// The epochs.csv columns are fixed when the stream is created; columns of
// load patterns that Finish is told to drop (patterns that may appear but
// did not) are removed by rewriting the file once, row by row.
type Stream struct {
	dir  string
	head *Report
	sum  *epochSummary
	// tmp is the temporary epochs.csv (nil when dir is empty: no files).
	tmp  *os.File
	bw   *bufio.Writer
	cw   *csv.Writer
	row  []string
	n    int
	last int64
	err  error
	// created is the report folder when the stream created it: an
	// unfinished stream removes it again if it is still empty.
	created string
}

// NewStream starts a report in dir (created if needed; "" writes no
// files, the summaries are still kept). head gives the report's columns
// (Members, Patterns: every pattern that may be estimated, in column
// order), the period From and To (required: the plots' pixel columns are
// fixed by it) and CriticalValue; its Epochs must be empty. The other
// fields may be filled until Finish. The caller owns head; Finish writes
// from it.
func NewStream(dir string, head *Report) (*Stream, error) {
	if head == nil {
		return nil, errors.New("report: nothing to write (nil report)")
	}
	if head.From.IsZero() || !head.To.After(head.From) {
		return nil, fmt.Errorf("report for %q: a streamed report needs its period (From %s before To %s)", head.Structure, timeText(head.From), timeText(head.To))
	}
	if len(head.Epochs) > 0 {
		return nil, fmt.Errorf("report for %q: a streamed report takes its epochs through Add, not in Epochs", head.Structure)
	}
	return newStream(dir, head, periodRange(head))
}

func newStream(dir string, head *Report, tr timeRange) (*Stream, error) {
	if err := head.validateColumns(); err != nil {
		return nil, fmt.Errorf("report for %q: %w", head.Structure, err)
	}
	s := &Stream{dir: dir, head: head, sum: newEpochSummary(tr, head.CriticalValue, len(head.Members), len(head.Patterns))}
	s.row = make([]string, 0, 5+5*len(head.Members)+2*len(head.Patterns))
	if dir == "" {
		s.cw = csv.NewWriter(io.Discard)
	} else {
		if _, err := os.Stat(dir); os.IsNotExist(err) {
			s.created = dir
		}
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return nil, fmt.Errorf("report: creating folder %s: %w", dir, err)
		}
		tmp, err := os.CreateTemp(dir, "."+EpochsFile+".*")
		if err != nil {
			return nil, fmt.Errorf("report: writing %s: %w", filepath.Join(dir, EpochsFile), err)
		}
		s.tmp = tmp
		s.bw = bufio.NewWriterSize(tmp, 1<<16)
		s.cw = csv.NewWriter(s.bw)
	}
	if err := s.cw.Write(epochsHeader(head)); err != nil {
		s.Abort()
		return nil, fmt.Errorf("report: %s: %w", EpochsFile, err)
	}
	return s, nil
}

// Add writes one epoch (oldest first; one result per member and one
// estimate per pattern of the stream's columns).
func (s *Stream) Add(e Epoch) error {
	if s.err != nil {
		return s.err
	}
	r := s.head
	switch {
	case len(e.Members) != len(r.Members):
		s.err = fmt.Errorf("epoch %d (%s) has %d member results for %d members; give one per Report.Members entry",
			s.n, timeText(e.Time), len(e.Members), len(r.Members))
	case len(e.Loads) != len(r.Patterns):
		s.err = fmt.Errorf("epoch %d (%s) has %d load estimates for %d patterns; give one per Report.Patterns entry",
			s.n, timeText(e.Time), len(e.Loads), len(r.Patterns))
	case s.n > 0 && e.Time.UnixNano() < s.last:
		s.err = fmt.Errorf("epoch %d (%s) is earlier than epoch %d (%s); epochs must be oldest first",
			s.n, timeText(e.Time), s.n-1, timeText(timeOf(s.last)))
	}
	if s.err != nil {
		s.err = fmt.Errorf("report for %q: %w", r.Structure, s.err)
		return s.err
	}
	s.row = epochRow(s.row[:0], e)
	if err := s.cw.Write(s.row); err != nil {
		s.err = fmt.Errorf("report: %s: %w", EpochsFile, err)
		return s.err
	}
	s.sum.add(e)
	s.n++
	s.last = e.Time.UnixNano()
	return nil
}

// Epochs returns the number of epochs added.
func (s *Stream) Epochs() int { return s.n }

// Finish completes the report: keep says which of the stream's pattern
// columns to keep (nil: all; the others are dropped from epochs.csv and
// from head.Patterns), then events.csv, members.csv (when the report has
// member summaries) and index.html are written from head and the
// summaries, and epochs.csv is put in place. The stream is done
// afterwards, also on error (its temporary file is removed).
func (s *Stream) Finish(keep []bool) error {
	defer s.Abort()
	if s.err != nil {
		return s.err
	}
	r := s.head
	if keep != nil && len(keep) != len(r.Patterns) {
		return fmt.Errorf("report for %q: %d pattern flags to keep for %d patterns", r.Structure, len(keep), len(r.Patterns))
	}
	s.cw.Flush()
	if err := s.cw.Error(); err != nil {
		return fmt.Errorf("report: %s: %w", EpochsFile, err)
	}
	var drop []int // epochs.csv columns to drop
	if keep != nil {
		var kept []Pattern
		for j, k := range keep {
			if k {
				kept = append(kept, r.Patterns[j])
				continue
			}
			c := 5 + 5*len(r.Members) + 2*j
			drop = append(drop, c, c+1)
		}
		r.Patterns = kept
	}
	s.sum.finish(keep)
	if s.dir == "" {
		return nil
	}
	if err := s.bw.Flush(); err != nil {
		return fmt.Errorf("report: writing %s: %w", s.tmp.Name(), err)
	}
	if err := s.tmp.Close(); err != nil {
		return fmt.Errorf("report: writing %s: %w", s.tmp.Name(), err)
	}
	csvPath := s.tmp.Name()
	if len(drop) > 0 {
		p, err := dropColumns(csvPath, drop)
		os.Remove(csvPath)
		if err != nil {
			return err
		}
		csvPath = p
		s.tmp = nil
		defer os.Remove(p)
	}
	files := []struct {
		name  string
		write func(*bytes.Buffer) error
	}{
		{EventsFile, func(b *bytes.Buffer) error { return writeEventsCSV(b, r) }},
		{HTMLFile, func(b *bytes.Buffer) error { return writeHTML(b, r, s.sum) }},
	}
	if len(r.MemberSummaries) > 0 {
		files = append(files, struct {
			name  string
			write func(*bytes.Buffer) error
		}{MembersFile, func(b *bytes.Buffer) error { return writeMembersCSV(b, r) }})
	}
	for _, f := range files {
		var buf bytes.Buffer
		if err := f.write(&buf); err != nil {
			return fmt.Errorf("report: %s: %w", f.name, err)
		}
		if err := writeFileAtomic(filepath.Join(s.dir, f.name), buf.Bytes()); err != nil {
			return fmt.Errorf("report: %w", err)
		}
	}
	if err := os.Chmod(csvPath, 0o644); err != nil {
		return fmt.Errorf("report: writing %s: %w", csvPath, err)
	}
	if err := os.Rename(csvPath, filepath.Join(s.dir, EpochsFile)); err != nil {
		return fmt.Errorf("report: writing %s: %w", filepath.Join(s.dir, EpochsFile), err)
	}
	s.tmp = nil
	return nil
}

// Abort removes the temporary epochs.csv of an unfinished stream, and
// the report folder if the stream created it and it is empty. Calling it
// after Finish does nothing.
func (s *Stream) Abort() {
	if s.tmp != nil {
		s.tmp.Close()
		os.Remove(s.tmp.Name())
		s.tmp = nil
		if s.created != "" {
			os.Remove(s.created) // only if empty
		}
	}
	if s.err == nil {
		s.err = errors.New("report: the stream is finished")
	}
}

// dropColumns copies the CSV file at path to a new temporary file in the
// same folder without the given columns (ascending), row by row, and
// returns the new file's path.
func dropColumns(path string, drop []int) (string, error) {
	in, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("report: rereading %s: %w", path, err)
	}
	defer in.Close()
	out, err := os.CreateTemp(filepath.Dir(path), "."+EpochsFile+".*")
	if err != nil {
		return "", fmt.Errorf("report: writing %s: %w", EpochsFile, err)
	}
	fail := func(err error) (string, error) {
		out.Close()
		os.Remove(out.Name())
		return "", fmt.Errorf("report: dropping unused columns of %s: %w", EpochsFile, err)
	}
	cr := csv.NewReader(bufio.NewReaderSize(in, 1<<16))
	cr.ReuseRecord = true
	bw := bufio.NewWriterSize(out, 1<<16)
	cw := csv.NewWriter(bw)
	var row []string
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return fail(err)
		}
		row = row[:0]
		d := 0
		for i, v := range rec {
			if d < len(drop) && drop[d] == i {
				d++
				continue
			}
			row = append(row, v)
		}
		if err := cw.Write(row); err != nil {
			return fail(err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fail(err)
	}
	if err := bw.Flush(); err != nil {
		return fail(err)
	}
	if err := out.Close(); err != nil {
		os.Remove(out.Name())
		return "", fmt.Errorf("report: writing %s: %w", out.Name(), err)
	}
	return out.Name(), nil
}

// epochRow appends one epochs.csv row of e to row (epochsHeader's order).
func epochRow(row []string, e Epoch) []string {
	row = append(row, timeText(e.Time), floatText(e.Fit.ChiSquare), strconv.Itoa(e.Fit.DOF),
		floatText(e.Fit.PValue), boolText(e.Fit.Rejected))
	for _, m := range e.Members {
		if !m.Present {
			row = append(row, "", "", "", "", "")
			continue
		}
		row = append(row, floatText(m.Measured), floatText(m.Predicted), floatText(m.SigmaResidual),
			floatText(m.W), boolText(m.Checkable))
	}
	for _, l := range e.Loads {
		if !l.Present {
			row = append(row, "", "")
			continue
		}
		row = append(row, floatText(l.Value), floatText(l.StdDev))
	}
	return row
}
