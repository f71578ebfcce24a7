package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
	"time"

	"golang.org/x/term"

	"trussmonitor/internal/csvimport"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/ingest"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/store"
)

// importBatch is how many readings go into one store transaction; PROBES.md
// measured ~135k rows/s at 10000 rows per transaction and 85k at 1000.
const importBatch = 5000

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
	total := csvimport.Counts{Rejected: map[string]int{}}
	failed := 0
	im := &csvimport.Importer{
		Store: db, Sensors: m, Fatigue: tr, Batch: *batch,
		Limits: ingest.Limits{MaxAbsValue: ingest.DefaultMaxAbsValue, MaxAhead: ingest.DefaultMaxAhead, MaxBehind: *maxAge},
	}
	for _, path := range files {
		var size int64
		if fi, err := os.Stat(path); err == nil {
			size = fi.Size()
		}
		bar := newProgressBar(progress, path, size)
		c, err := im.File(ctx, path, bar.update)
		bar.done()
		total.Add(c)
		fmt.Fprintf(stdout, "%s: %s\n", path, importSummary(c))
		if err != nil {
			fmt.Fprintf(stderr, "monitor import: %s: %v\n", path, err)
			failed++
			if ctx.Err() != nil {
				break
			}
		}
	}
	if len(files) > 1 {
		fmt.Fprintf(stdout, "total: %s\n", importSummary(total))
	}
	// The model the readings were imported against, in force from the
	// earliest of them: monitor replay of this store finds it and needs
	// no --structure.
	if !total.First.IsZero() {
		hash, err := db.PutModel(context.WithoutCancel(ctx), st.Name, content, total.First)
		if err != nil {
			fmt.Fprintf(stderr, "monitor import: storing the model version: %v\n", err)
			return 1
		}
		fmt.Fprintf(stdout, "model: %s of %s (%s) stored as in force from %s; monitor replay of this store needs no --structure\n",
			hash[:12], st.Name, *structPath, total.First.UTC().Format(time.RFC3339))
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

// importSummary is the one-line tally of an import.
func importSummary(c csvimport.Counts) string {
	s := fmt.Sprintf("read %d, stored %d, duplicates %d, rejected %d", c.Read, c.Stored, c.Duplicates, c.RejectedTotal())
	if len(c.Rejected) > 0 {
		keys := make([]string, 0, len(c.Rejected))
		for k := range c.Rejected {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		parts := make([]string, len(keys))
		for i, k := range keys {
			parts[i] = fmt.Sprintf("%s %d", k, c.Rejected[k])
		}
		s += " (" + strings.Join(parts, ", ") + ")"
	}
	return s
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
