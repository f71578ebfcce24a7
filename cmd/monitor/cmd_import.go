package main

import (
	"bufio"
	"compress/gzip"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strconv"
	"strings"
	"time"

	"golang.org/x/term"

	"trussmonitor/internal/csvimport"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/ingest"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// importBatch is how many readings go into one store transaction; PROBES.md
// measured ~135k rows/s at 10000 rows per transaction and 85k at 1000.
const importBatch = 5000

// importCounts is the tally of one import.
type importCounts struct {
	read, stored, duplicates int
	rejected                 map[string]int
	first                    time.Time // earliest accepted reading
}

func (c *importCounts) add(o importCounts) {
	c.read += o.read
	c.stored += o.stored
	c.duplicates += o.duplicates
	if !o.first.IsZero() && (c.first.IsZero() || o.first.Before(c.first)) {
		c.first = o.first
	}
	for k, v := range o.rejected {
		c.rejected[k] += v
	}
}

func (c importCounts) rejectedTotal() int {
	n := 0
	for _, v := range c.rejected {
		n += v
	}
	return n
}

// runImport implements "monitor import --db FILE --structure FILE --sensors
// FILE CSVFILE...": it validates every value of the logger CSV files against
// the sensor map and stores the accepted raw readings (once per channel and
// timestamp) and the rejected ones as dead letters with their reason.
func runImport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor import", flag.ContinueOnError)
	fs.SetOutput(stderr)
	dbPath := fs.String("db", "", "reading store (SQLite file; created if missing)")
	structPath := fs.String("structure", "", "structure file (YAML)")
	sensorPath := fs.String("sensors", "", "sensor map of the structure (YAML)")
	batch := fs.Int("batch", importBatch, "readings per store transaction")
	maxAge := fs.Duration("max-age", 0, "refuse readings older than this before now (outside_time_window); 0: no limit (an import is the way to load a backlog)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor import --db FILE --structure FILE --sensors FILE CSVFILE...")
		fmt.Fprintln(stderr, "Imports logger CSV files (format: docs/payloads.md; gzip-compressed files too) into the reading store,")
		fmt.Fprintln(stderr, "and stores the structure file as the model version in force from the earliest reading.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	files := fs.Args()
	var missing []string
	for name, v := range map[string]string{"--db": *dbPath, "--structure": *structPath, "--sensors": *sensorPath} {
		if v == "" {
			missing = append(missing, name)
		}
	}
	if len(missing) > 0 || len(files) == 0 || *batch < 1 {
		sort.Strings(missing)
		if len(missing) > 0 {
			fmt.Fprintf(stderr, "monitor import: missing %s\n", strings.Join(missing, ", "))
		}
		if len(files) == 0 {
			fmt.Fprintln(stderr, "monitor import: no CSV file given")
		}
		if *batch < 1 {
			fmt.Fprintln(stderr, "monitor import: --batch must be at least 1")
		}
		fs.Usage()
		return 2
	}

	pair, err := instrumented.Load(*structPath, *sensorPath)
	if err != nil {
		fmt.Fprintf(stderr, "monitor import: %v\n", err)
		return 1
	}
	st, content, m := pair.Structure, pair.Content, pair.Sensors
	db, err := store.Open(*dbPath, store.Options{})
	if err != nil {
		fmt.Fprintf(stderr, "monitor import: %v\n", err)
		return 1
	}
	defer db.Close()

	var progress io.Writer
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		progress = stderr
	}
	// Gauges with a fatigue block are counted in each commit, as by the
	// live ingest, continuing from the counter state already stored.
	var tr *fatiguetrack.Tracker
	if gs := m.FatigueGauges(); len(gs) > 0 {
		tr = fatiguetrack.New(nil)
		tr.Add(m.StructureName(), m, gs)
		if err := tr.Load(context.WithoutCancel(ctx), db); err != nil {
			fmt.Fprintf(stderr, "monitor import: %v\n", err)
			return 1
		}
	}
	total := importCounts{rejected: map[string]int{}}
	failed := 0
	lim := ingest.Limits{MaxAbsValue: ingest.DefaultMaxAbsValue, MaxAhead: ingest.DefaultMaxAhead, MaxBehind: *maxAge}
	for _, path := range files {
		c, err := importFile(ctx, db, m, lim, tr, path, *batch, progress)
		total.add(c)
		fmt.Fprintf(stdout, "%s: %s\n", path, c.summary())
		if err != nil {
			fmt.Fprintf(stderr, "monitor import: %s: %v\n", path, err)
			failed++
			if ctx.Err() != nil {
				break
			}
		}
	}
	if len(files) > 1 {
		fmt.Fprintf(stdout, "total: %s\n", total.summary())
	}
	// The model the readings were imported against, in force from the
	// earliest of them: monitor replay of this store finds it and needs
	// no --structure.
	if !total.first.IsZero() {
		hash, err := db.PutModel(context.WithoutCancel(ctx), st.Name, content, total.first)
		if err != nil {
			fmt.Fprintf(stderr, "monitor import: storing the model version: %v\n", err)
			return 1
		}
		fmt.Fprintf(stdout, "model: %s of %s (%s) stored as in force from %s; monitor replay of this store needs no --structure\n",
			hash[:12], st.Name, *structPath, total.first.UTC().Format(time.RFC3339))
	}
	// Readings of closed hours go into compressed blocks now, as the
	// service would do within the hour.
	if cs, err := db.Compact(context.WithoutCancel(ctx), time.Now().Add(-store.CompactAfter)); err != nil {
		fmt.Fprintf(stderr, "monitor import: compacting into blocks: %v (the readings stay stored as rows)\n", err)
	} else if cs.Blocks > 0 {
		fmt.Fprintf(stdout, "compacted %d readings of closed hours into %d blocks\n", cs.Readings, cs.Blocks)
	}
	if tr != nil {
		var late int64
		for _, g := range tr.Gauges() {
			late += g.Late
		}
		if late > 0 {
			fmt.Fprintf(stdout, "fatigue: %d readings of fatigue gauges were older than the last one counted and are stored but not counted (import files in time order)\n", late)
		}
	}
	if failed > 0 {
		fmt.Fprintf(stderr, "monitor import: %d of %d files stopped at an error; the readings before it are stored\n", failed, len(files))
		return 1
	}
	fmt.Fprintf(stdout, "next: replay a period of them (the stored model version is used):\n  monitor replay --db %s --sensors %s --from T --to T\n", *dbPath, *sensorPath)
	return 0
}

func (c importCounts) summary() string {
	s := fmt.Sprintf("read %d, stored %d, duplicates %d, rejected %d", c.read, c.stored, c.duplicates, c.rejectedTotal())
	if len(c.rejected) > 0 {
		keys := make([]string, 0, len(c.rejected))
		for k := range c.rejected {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		parts := make([]string, len(keys))
		for i, k := range keys {
			parts[i] = fmt.Sprintf("%s %d", k, c.rejected[k])
		}
		s += " (" + strings.Join(parts, ", ") + ")"
	}
	return s
}

// importFile streams one CSV file into the store. Readings accepted before
// an error in the file are committed.
// Every reading goes through ingest.Admit, the decision MQTT ingest makes,
// with the same reason codes.
func importFile(ctx context.Context, db *store.Store, m *sensors.Map, lim ingest.Limits, tr *fatiguetrack.Tracker, path string, batch int, progress io.Writer) (importCounts, error) {
	c := importCounts{rejected: map[string]int{}}
	f, err := os.Open(path)
	if err != nil {
		return c, err
	}
	defer f.Close()
	var size int64
	if fi, err := f.Stat(); err == nil {
		size = fi.Size()
	}
	cr := &countingReader{r: f}
	bar := newProgressBar(progress, path, size)
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
			c.rejected[string(ingest.ReasonConflicting)] += conflicts
		}
		c.stored += res.Inserted[0]
		c.duplicates += len(readings) - res.Inserted[0] - conflicts
		readings, lines, dead = readings[:0], lines[:0], dead[:0]
		bar.update(cr.n, c.read)
		return nil
	}
	_, readErr := csvimport.Read(src, func(r csvimport.Record) error {
		c.read++
		now := time.Now().UTC()
		rd, rej := ingest.Admit(lim, m, r.Channel, r.Unit, r.Time, r.Value, now)
		if rej != nil {
			c.rejected[string(rej.Reason)]++
			dead = append(dead, store.DeadLetter{
				Topic: topic, Received: now, Reason: string(rej.Reason),
				Detail:  fmt.Sprintf("line %d: %s", r.Line, rej.Detail),
				Payload: []byte(r.Channel + "," + r.Unit + "," + r.Time.Format(time.RFC3339Nano) + "," + strconv.FormatFloat(r.Value, 'g', -1, 64)),
			})
		} else {
			readings = append(readings, rd)
			lines = append(lines, r.Line)
			if c.first.IsZero() || rd.Time.Before(c.first) {
				c.first = rd.Time
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
	bar.done()
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

// progressBar draws one line on a terminal, at most five times a second; it
// does nothing when w is nil (stderr is not a terminal).
type progressBar struct {
	w     io.Writer
	name  string
	size  int64
	last  time.Time
	drawn bool
}

func newProgressBar(w io.Writer, name string, size int64) *progressBar {
	return &progressBar{w: w, name: name, size: size}
}

func (b *progressBar) update(done int64, readings int) {
	if b.w == nil || time.Since(b.last) < 200*time.Millisecond {
		return
	}
	b.last = time.Now()
	b.drawn = true
	frac := 1.0
	if b.size > 0 {
		frac = float64(done) / float64(b.size)
	}
	if frac > 1 {
		frac = 1
	}
	const width = 30
	n := int(frac * width)
	fmt.Fprintf(b.w, "\r%s [%s%s] %3.0f%% %d readings", b.name, strings.Repeat("#", n), strings.Repeat(" ", width-n), frac*100, readings)
}

func (b *progressBar) done() {
	if b.w != nil && b.drawn {
		fmt.Fprint(b.w, "\r\033[K")
	}
}
