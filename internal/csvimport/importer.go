package csvimport

import (
	"bufio"
	"compress/gzip"
	"context"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"time"

	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/ingest"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// Counts is the tally of one import.
type Counts struct {
	Read, Stored, Duplicates int
	// Rejected counts the rejected readings by reason code (ingest.Reason).
	Rejected map[string]int
	// First is the time of the earliest accepted reading.
	First time.Time
}

// Add adds the tally o to c.
func (c *Counts) Add(o Counts) {
	c.Read += o.Read
	c.Stored += o.Stored
	c.Duplicates += o.Duplicates
	if !o.First.IsZero() && (c.First.IsZero() || o.First.Before(c.First)) {
		c.First = o.First
	}
	if c.Rejected == nil && len(o.Rejected) > 0 {
		c.Rejected = map[string]int{}
	}
	for k, v := range o.Rejected {
		c.Rejected[k] += v
	}
}

// RejectedTotal is the number of rejected readings.
func (c Counts) RejectedTotal() int {
	n := 0
	for _, v := range c.Rejected {
		n += v
	}
	return n
}

// Importer stores logger CSV files of one structure in the reading store,
// as MQTT ingest stores the readings it receives.
type Importer struct {
	Store   *store.Store
	Sensors *sensors.Map
	// Limits bound the accepted values and times (ingest.Admit).
	Limits ingest.Limits
	// Fatigue counts the gauges with a fatigue block in each commit, as the
	// live ingest does (nil: none).
	Fatigue *fatiguetrack.Tracker
	// Batch is how many readings go into one store transaction.
	Batch int
}

// File streams one CSV file (gzip-compressed too) into the store.
// Readings accepted before an error in the file are committed. Every
// reading goes through ingest.Admit, the decision MQTT ingest makes, with
// the same reason codes; the rejected ones are stored as dead letters.
// progress, when not nil, is called after every committed batch with the
// bytes of the file read so far and the readings read.
func (im *Importer) File(ctx context.Context, path string, progress func(bytesRead int64, readings int)) (Counts, error) {
	db, m, lim, tr, batch := im.Store, im.Sensors, im.Limits, im.Fatigue, im.Batch
	c := Counts{Rejected: map[string]int{}}
	if batch < 1 {
		return c, fmt.Errorf("import of %s: batch size %d; want at least 1", path, batch)
	}
	f, err := os.Open(path)
	if err != nil {
		return c, err
	}
	defer f.Close()
	cr := &countingReader{r: f}
	// A gzip file (as the recorded day ships) is read through gunzip,
	// recognised by its magic bytes 1f 8b (RFC 1952 section 2.3.1).
	br := bufio.NewReader(cr)
	var src io.Reader = br
	if magic, _ := br.Peek(2); len(magic) == 2 && magic[0] == 0x1f && magic[1] == 0x8b {
		zr, err := gzip.NewReader(br)
		if err != nil {
			return c, fmt.Errorf("gzip: %w", err)
		}
		defer zr.Close()
		src = zr
	}

	readings := make([]store.Reading, 0, batch)
	var lines []int // CSV line of each reading
	var dead []store.DeadLetter
	topic := "import:" + path
	flush := func() error {
		if len(readings) == 0 && len(dead) == 0 {
			return nil
		}
		// Commit even when ctx is cancelled: readings already accepted
		// must not be lost on an interrupt.
		b := store.Batch{
			Groups:      []store.Group{{Structure: m.StructureName(), Readings: readings}},
			DeadLetters: dead,
			OnConflict: func(_ int, cs []store.Conflict) store.DeadLetter {
				parts := make([]string, 0, min(len(cs), 5))
				for _, k := range cs[:min(len(cs), 5)] {
					r := readings[k.Index]
					parts = append(parts, fmt.Sprintf("line %d: channel %q at %s: value %g, stored %g", lines[k.Index], r.Channel, r.Time.Format(time.RFC3339Nano), r.Value, k.Stored))
				}
				return store.DeadLetter{Topic: topic, Received: time.Now().UTC(), Reason: string(ingest.ReasonConflicting),
					Detail:  fmt.Sprintf("%d readings conflict with a stored reading of the same channel and time: %s", len(cs), strings.Join(parts, "; ")),
					Payload: []byte(parts[0])}
			},
		}
		var applyFatigue func()
		if tr != nil {
			b.Fatigue = func(r store.CommitResult) ([]store.FatigueUpdate, error) {
				ups, apply, err := tr.Stage(b.Groups, r)
				applyFatigue = apply
				return ups, err
			}
		}
		res, err := db.Commit(context.WithoutCancel(ctx), b)
		if err != nil {
			return fmt.Errorf("storing readings: %w", err)
		}
		if applyFatigue != nil {
			applyFatigue()
		}
		conflicts := len(res.Conflicts[0])
		if conflicts > 0 {
			c.Rejected[string(ingest.ReasonConflicting)] += conflicts
		}
		c.Stored += res.Inserted[0]
		c.Duplicates += len(readings) - res.Inserted[0] - conflicts
		readings, lines, dead = readings[:0], lines[:0], dead[:0]
		if progress != nil {
			progress(cr.n, c.Read)
		}
		return nil
	}
	_, readErr := Read(src, func(r Record) error {
		c.Read++
		now := time.Now().UTC()
		rd, rej := ingest.Admit(lim, m, r.Channel, r.Unit, r.Time, r.Value, now)
		if rej != nil {
			c.Rejected[string(rej.Reason)]++
			dead = append(dead, store.DeadLetter{
				Topic: topic, Received: now, Reason: string(rej.Reason),
				Detail:  fmt.Sprintf("line %d: %s", r.Line, rej.Detail),
				Payload: []byte(r.Channel + "," + r.Unit + "," + r.Time.Format(time.RFC3339Nano) + "," + strconv.FormatFloat(r.Value, 'g', -1, 64)),
			})
		} else {
			readings = append(readings, rd)
			lines = append(lines, r.Line)
			if c.First.IsZero() || rd.Time.Before(c.First) {
				c.First = rd.Time
			}
		}
		if len(readings)+len(dead) >= batch {
			if err := ctx.Err(); err != nil {
				return fmt.Errorf("interrupted: %w", err)
			}
			return flush()
		}
		return nil
	})
	flushErr := flush()
	if readErr != nil {
		return c, readErr
	}
	return c, flushErr
}

// countingReader counts the bytes read, for the progress bar.
type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}
