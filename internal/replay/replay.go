// Package replay runs a stored period of raw readings through the same
// pipeline as live running (calibration, epochs, reconciliation, alarm
// rules on the epoch clock) at full speed, and writes the report folder
// (internal/report): index.html, epochs.csv, events.csv and members.csv.
//
// The same readings with the same model give byte-identical CSV files: the
// pipeline has no clock in replay (epochs close on the readings' own times),
// the store returns readings in time and channel order, and nothing measured
// on the wall clock (such as the per-epoch processing time) is written.
//
// A replay is a monitoring aid, not a safety verdict: an alarm, or its
// absence, does not establish that a structure is safe or unsafe; decisions
// rest with a licensed engineer under local codes.
package replay

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/report"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/settings"
	"trussmonitor/internal/store"
	"trussmonitor/internal/structfile"
)

// Defaults of Options.
const (
	// DefaultBatch is the number of readings handed to the pipeline at a
	// time.
	DefaultBatch = 4096
)

// Options configure one replay.
type Options struct {
	// DB is the path of the store file.
	DB string
	// From and To bound the replayed period [From, To).
	From, To time.Time
	// SensorsFile is the structure's sensor map (required).
	SensorsFile string
	// StructureFile names the structure; it is also the model when the
	// store holds no model version in force at From. Optional: without it
	// the structure is the one the sensor map names.
	StructureFile string
	// ModelFile, when set, is a structure file replayed against instead of
	// the stored model version ("what if" questions).
	ModelFile string
	// OutDir is the report folder; empty writes no report.
	OutDir string
	// Window and MaxLateness configure the epoch assembler (zero: those of
	// the default service configuration, settings.Defaults).
	Window, MaxLateness time.Duration
	// EstimateMissingLoads turns a measured load pattern whose channel is
	// missing in an epoch into an unknown to estimate (otherwise the epoch
	// is skipped), as the service's missing_load: estimate.
	EstimateMissingLoads bool
	// Rules are the alarm rules; nil means those of the default service
	// configuration (settings.Defaults).
	Rules []alerts.Rule
	// Batch is the number of readings per pipeline call (0: DefaultBatch).
	Batch int
	// Sinks receive every epoch's result too, after the report's
	// collector (for example to store the results); optional.
	Sinks []pipeline.Sink
	// Progress receives a progress line a few times a second (readings
	// done of the total, rate, time left); nil is quiet.
	Progress io.Writer
}

// Summary is what a replay did.
type Summary struct {
	Structure string
	// ModelVersion is the content hash (hex SHA-256) of the model used;
	// ModelSource says where it came from.
	ModelVersion, ModelSource string
	From, To                  time.Time
	// Total is the number of stored readings in the period; Readings the
	// number fed (equal unless interrupted); ConvertErrors those the sensor
	// map could not convert; Late those that arrived after their epoch
	// closed.
	Total, Readings, ConvertErrors, Late int64
	// Epochs is the number of epochs, ByOutcome per outcome (accepted,
	// rejected, skipped, failed). Only fitted epochs are in the report's
	// epoch table.
	Epochs    int64
	ByOutcome map[string]int64
	// Raised counts raised alarm events by rule; Events is the number of
	// events (raised and cleared).
	Raised map[alerts.RuleName]int
	Events int
	// Report is the report (also when OutDir is empty) without its
	// epochs: they were streamed to epochs.csv as they came and are not
	// kept (Report.Epochs is empty), so that memory does not grow with
	// the period.
	Report *report.Report
	// OutDir is the folder written ("" when none).
	OutDir string
	// Warnings are things the user should know (the model changed in the
	// period, the structure file differs from the stored model, ...).
	Warnings []string
	// Elapsed is the wall-clock time of the replay (not in the report).
	Elapsed time.Duration
}

// EmptyPeriodError is returned when the store holds no reading of the
// structure in the period. Stored is the number of readings of the
// structure in the whole store, First and Last their time span (zero when
// Stored is 0), Structures the structures the store has readings of.
type EmptyPeriodError struct {
	DB, Structure string
	From, To      time.Time
	Stored        int64
	First, Last   time.Time
	Structures    []string
}

func (e *EmptyPeriodError) Error() string {
	if e.Stored == 0 {
		return fmt.Sprintf("store %s holds no readings of structure %q (structures with readings: %s); import or record readings first, or give the sensor map of a stored structure",
			e.DB, e.Structure, listOrNone(e.Structures))
	}
	return fmt.Sprintf("store %s holds no readings of structure %q in [%s, %s); it holds %d readings of it from %s to %s; choose --from and --to inside that span",
		e.DB, e.Structure, e.From.Format(time.RFC3339), e.To.Format(time.RFC3339), e.Stored,
		e.First.Format(time.RFC3339Nano), e.Last.Format(time.RFC3339Nano))
}

func listOrNone(s []string) string {
	if len(s) == 0 {
		return "none"
	}
	out := ""
	for i, v := range s {
		if i > 0 {
			out += ", "
		}
		out += fmt.Sprintf("%q", v)
	}
	return out
}

// Run replays the period and writes the report folder.
func Run(ctx context.Context, opt Options) (*Summary, error) {
	started := time.Now()
	if err := opt.check(); err != nil {
		return nil, err
	}
	sensorData, err := os.ReadFile(opt.SensorsFile)
	if err != nil {
		return nil, fmt.Errorf("sensor map: %w", err)
	}
	// store.Open creates a missing file; a replay only reads, so a
	// missing file is an error here.
	if _, err := os.Stat(opt.DB); err != nil {
		return nil, fmt.Errorf("reading store: %w; give the store file the service or \"monitor import\" wrote", err)
	}
	db, err := store.Open(opt.DB, store.Options{})
	if err != nil {
		return nil, err
	}
	defer db.Close()

	mdl, err := resolveModel(ctx, db, opt, sensorData)
	if err != nil {
		return nil, err
	}
	sum := &Summary{
		Structure: mdl.name, ModelVersion: mdl.hash, ModelSource: mdl.source,
		From: opt.From.UTC(), To: opt.To.UTC(), Warnings: mdl.warnings,
		Raised: map[alerts.RuleName]int{},
	}
	sm, err := instrumented.SensorsFor(opt.SensorsFile, sensorData, mdl.st, mdl.source)
	if err != nil {
		return nil, err
	}
	m, err := model.Analyze(mdl.st)
	if err != nil {
		return nil, fmt.Errorf("model %s (%s): %w", short(mdl.hash), mdl.source, err)
	}

	total, err := db.CountReadings(ctx, mdl.name, opt.From, opt.To)
	if err != nil {
		return nil, err
	}
	if total == 0 {
		return nil, emptyPeriod(ctx, db, opt, mdl.name)
	}
	sum.Total = total

	// The report's head: its columns, period and test figures are known
	// before the first epoch; the rest is filled in after the replay.
	rep := &report.Report{
		Structure: mdl.name, Title: mdl.st.Title, ModelVersion: mdl.hash,
		From: sum.From, To: sum.To, Alpha: alerts.GlobalTestSize(opt.Rules), Caution: report.Caution,
	}
	if mdl.st.Design != nil {
		rep.Design = mdl.st.Design.Standard.String()
	}
	col := &collector{}
	pl, err := pipeline.New(m, sm, pipeline.Config{
		Window: opt.Window, MaxLateness: opt.MaxLateness,
		Processor: reconcile.ProcessorOptions{EstimateMissingLoads: opt.EstimateMissingLoads},
		Rules:     opt.Rules,
	}, append([]pipeline.Sink{col}, opt.Sinks...)...)
	if err != nil {
		return nil, err
	}
	if err := col.start(opt, rep, pl.Processor(), sm, mdl.st); err != nil {
		return nil, err
	}
	defer col.stream.Abort()
	prog := newProgress(opt.Progress, mdl.name, total)
	fed, err := feed(ctx, db, pl, mdl.name, opt, prog)
	prog.done()
	if err != nil {
		return nil, err
	}
	pl.Flush(ctx)

	st := pl.Stats()
	sum.Readings = fed
	sum.ConvertErrors = st.ConvertErrors
	sum.Late = int64(st.Assembler.Late)
	sum.Epochs = st.Epochs
	sum.ByOutcome = st.ByOutcome
	if col.err != nil {
		return nil, fmt.Errorf("replay report: %w", col.err)
	}
	proc := pl.Processor()
	rep.Events = col.reportEvents()
	rep.MemberSummaries = col.totals.summaries(proc.Resistances())
	if rep.Fatigue, err = fatigueFigures(ctx, db, mdl.name, sm, opt.From, opt.To); err != nil {
		return nil, err
	}
	sum.Report = rep
	sum.Events = len(rep.Events)
	for _, e := range rep.Events {
		if e.Kind == alerts.Raised {
			sum.Raised[e.Rule]++
		}
	}
	if sum.ConvertErrors > 0 {
		sum.Warnings = append(sum.Warnings, fmt.Sprintf("%d stored readings could not be converted with sensor map %s (channel not in the map, or a value out of range); they were left out", sum.ConvertErrors, opt.SensorsFile))
	}
	if err := col.stream.Finish(col.keep(len(proc.Unknown()))); err != nil {
		return nil, err
	}
	sum.OutDir = opt.OutDir
	sum.Elapsed = time.Since(started)
	return sum, nil
}

// check validates and completes the options.
func (opt *Options) check() error {
	var missing []string
	if opt.DB == "" {
		missing = append(missing, "the store file (DB)")
	}
	if opt.SensorsFile == "" {
		missing = append(missing, "the sensor map (SensorsFile)")
	}
	if opt.From.IsZero() || opt.To.IsZero() {
		missing = append(missing, "the period (From and To)")
	}
	if len(missing) > 0 {
		return fmt.Errorf("replay: missing %s", strings.Join(missing, ", "))
	}
	if !opt.To.After(opt.From) {
		return fmt.Errorf("replay: the period ends (%s) before or when it starts (%s); give a To after From",
			opt.To.Format(time.RFC3339Nano), opt.From.Format(time.RFC3339Nano))
	}
	if opt.Window < 0 || opt.MaxLateness < 0 {
		return fmt.Errorf("replay: window %v and maximum lateness %v must not be negative", opt.Window, opt.MaxLateness)
	}
	if opt.Window == 0 || opt.MaxLateness == 0 || opt.Rules == nil {
		// The settings of the default service configuration, so that a
		// replay without a configuration assembles epochs and alarms as a
		// service without one does.
		def, err := settings.Defaults()
		if err != nil {
			return err
		}
		if opt.Window == 0 {
			opt.Window = def.Window
		}
		if opt.MaxLateness == 0 {
			opt.MaxLateness = def.MaxLateness
		}
		if opt.Rules == nil {
			opt.Rules = def.Rules
		}
	}
	if opt.Batch <= 0 {
		opt.Batch = DefaultBatch
	}
	return nil
}

// feed reads the stored readings in time order on one goroutine and hands
// them to the pipeline in batches on this one, so that reading the store
// and reconciling overlap on two cores. The order is the store's.
func feed(ctx context.Context, db *store.Store, pl *pipeline.Pipeline, structure string, opt Options, prog *progress) (int64, error) {
	rctx, cancel := context.WithCancel(ctx)
	defer cancel()
	const buffers = 6
	batches := make(chan []store.Reading, buffers-2)
	free := make(chan []store.Reading, buffers)
	for range buffers {
		free <- make([]store.Reading, 0, opt.Batch)
	}
	readErr := make(chan error, 1)
	go func() {
		defer close(batches)
		buf := <-free
		send := func() error {
			select {
			case batches <- buf:
			case <-rctx.Done():
				return rctx.Err()
			}
			select {
			case buf = <-free:
			case <-rctx.Done():
				return rctx.Err()
			}
			buf = buf[:0]
			return nil
		}
		err := db.ReadReadings(rctx, structure, opt.From, opt.To, func(r store.Reading) error {
			buf = append(buf, r)
			if len(buf) < opt.Batch {
				return nil
			}
			return send()
		})
		if err == nil && len(buf) > 0 {
			err = send()
		}
		readErr <- err
	}()
	var fed int64
	for b := range batches {
		if ctx.Err() != nil {
			break
		}
		pl.Feed(ctx, b)
		fed += int64(len(b))
		prog.update(fed)
		free <- b
	}
	cancel()
	for range batches { // let the reader stop
	}
	err := <-readErr
	if ctx.Err() != nil {
		return fed, fmt.Errorf("replay interrupted after %d of %d readings: %w", fed, prog.total, ctx.Err())
	}
	if err != nil {
		return fed, fmt.Errorf("reading the stored readings: %w", err)
	}
	return fed, nil
}

// emptyPeriod builds the error for a period without readings: how many
// readings the store has of the structure and their time span.
func emptyPeriod(ctx context.Context, db *store.Store, opt Options, structure string) error {
	e := &EmptyPeriodError{DB: opt.DB, Structure: structure, From: opt.From.UTC(), To: opt.To.UTC()}
	var err error
	if e.Stored, err = db.CountReadings(ctx, structure, time.Time{}, time.Time{}); err != nil {
		return err
	}
	if e.Structures, err = db.Structures(ctx); err != nil {
		return err
	}
	if e.Stored == 0 {
		return e
	}
	if e.First, err = firstReading(ctx, db, structure, time.Time{}); err != nil {
		return err
	}
	if e.Last, _, err = db.LastReading(ctx, structure); err != nil {
		return err
	}
	return e
}

var errFound = errors.New("found")

// firstReading returns the time of the first reading of structure at or
// after from (zero time when there is none).
func firstReading(ctx context.Context, db *store.Store, structure string, from time.Time) (time.Time, error) {
	var t time.Time
	err := db.ReadReadings(ctx, structure, from, time.Time{}, func(r store.Reading) error {
		t = r.Time
		return errFound
	})
	if err != nil && !errors.Is(err, errFound) {
		return time.Time{}, err
	}
	return t, nil
}

// resolved is the model chosen for a replay.
type resolved struct {
	name, hash, source string
	st                 *model.Structure
	warnings           []string
}

// resolveModel determines the structure and the model: --model FILE, else
// the stored model version in force at From, else --structure FILE.
func resolveModel(ctx context.Context, db *store.Store, opt Options, sensorData []byte) (*resolved, error) {
	name := sensors.StructureNameOf(sensorData)
	var structData []byte
	var structSt *model.Structure
	if opt.StructureFile != "" {
		var err error
		if structData, err = os.ReadFile(opt.StructureFile); err != nil {
			return nil, fmt.Errorf("structure file: %w", err)
		}
		if structSt, err = structfile.Parse(opt.StructureFile, structData); err != nil {
			return nil, err
		}
		if name != "" && name != structSt.Name {
			return nil, &instrumented.MismatchError{SensorsPath: opt.SensorsFile, MapStructure: name, StructurePath: opt.StructureFile, Structure: structSt.Name}
		}
		name = structSt.Name
	}
	if name == "" {
		return nil, fmt.Errorf("sensor map %s does not name its structure; give --structure FILE", opt.SensorsFile)
	}
	r := &resolved{name: name}

	if opt.ModelFile != "" {
		data, err := os.ReadFile(opt.ModelFile)
		if err != nil {
			return nil, fmt.Errorf("model file: %w", err)
		}
		st, err := structfile.Parse(opt.ModelFile, data)
		if err != nil {
			return nil, err
		}
		if st.Name != name {
			return nil, fmt.Errorf("model file %s is structure %q, the replay is of %q; a model to replay against must keep the structure's name",
				opt.ModelFile, st.Name, name)
		}
		r.st, r.hash = st, store.ModelHash(data)
		r.source = "file " + opt.ModelFile
		if stored, err := db.ModelAt(ctx, name, opt.From); err == nil && stored.Hash != r.hash {
			r.warnings = append(r.warnings, fmt.Sprintf("replayed against %s (version %s), not the stored model version %s in force at %s",
				opt.ModelFile, short(r.hash), short(stored.Hash), opt.From.UTC().Format(time.RFC3339)))
		}
		return r, nil
	}

	// The model in force when the period's first reading was taken (a
	// period may begin before the service first ran).
	at := opt.From
	if t, err := firstReading(ctx, db, name, opt.From); err == nil && t.After(at) && t.Before(opt.To) {
		at = t
	}
	stored, err := db.ModelAt(ctx, name, at)
	if errors.Is(err, store.ErrNotFound) {
		// No version yet when the first reading was taken (readings buffered
		// by the logger before the service first ran): the first version
		// recorded within the period is the one that was in force for it.
		if all, merr := db.Models(ctx, name); merr == nil {
			for _, mv := range all {
				if mv.FirstSeen.Before(opt.To) {
					stored, err = mv, nil
					r.warnings = append(r.warnings, fmt.Sprintf("no model version was recorded before the period's first reading at %s; using the first version, recorded at %s",
						at.UTC().Format(time.RFC3339Nano), mv.FirstSeen.UTC().Format(time.RFC3339Nano)))
					at = mv.FirstSeen
					break
				}
			}
		}
	}
	switch {
	case err == nil:
		st, perr := structfile.Parse(fmt.Sprintf("stored model %s of %s", short(stored.Hash), name), stored.Content)
		if perr != nil {
			return nil, fmt.Errorf("the stored model version %s of %q in force at %s does not parse with this build: %w; give --model FILE",
				short(stored.Hash), name, opt.From.UTC().Format(time.RFC3339), perr)
		}
		r.st, r.hash = st, stored.Hash
		r.source = "stored version in force at " + at.UTC().Format(time.RFC3339)
		if structData != nil && store.ModelHash(structData) != stored.Hash {
			r.warnings = append(r.warnings, fmt.Sprintf("structure file %s differs from the stored model version %s in force at %s; the replay uses the stored version (pass --model %s to replay against the file)",
				opt.StructureFile, short(stored.Hash), opt.From.UTC().Format(time.RFC3339), opt.StructureFile))
		}
		if last, lerr := db.ModelAt(ctx, name, opt.To.Add(-time.Nanosecond)); lerr == nil && last.Hash != stored.Hash {
			r.warnings = append(r.warnings, fmt.Sprintf("the model of %q changed within the period (version %s at the start, %s at the end); this replay uses the version at the start throughout: replay the parts separately",
				name, short(stored.Hash), short(last.Hash)))
		}
	case errors.Is(err, store.ErrNotFound):
		if structSt == nil {
			return nil, fmt.Errorf("store %s holds no model version of structure %q in force at %s; give --structure FILE (or --model FILE) to replay against a structure file",
				opt.DB, name, opt.From.UTC().Format(time.RFC3339))
		}
		r.st, r.hash = structSt, store.ModelHash(structData)
		r.source = "file " + opt.StructureFile + " (no model version stored for the period)"
	default:
		return nil, err
	}
	return r, nil
}

// short abbreviates a content hash for messages.
func short(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}

// start starts the report's stream in opt.OutDir (none: no files) with
// the columns of the pipeline's processor: the gauged members in its row
// order, the patterns of reportPatterns in their reference units, and the
// critical value of the w-test.
func (c *collector) start(opt Options, rep *report.Report, proc *reconcile.Processor, sm *sensors.Map, st *model.Structure) error {
	rep.Members = proc.Gauged()
	rep.CriticalValue = proc.Critical()
	for _, p := range reportPatterns(proc.Unknown(), sm, opt.EstimateMissingLoads) {
		rep.Patterns = append(rep.Patterns, report.Pattern{Name: p, Unit: "1"})
	}
	scale := referenceUnits(rep.Patterns, st)
	s, err := report.NewStream(opt.OutDir, rep)
	if err != nil {
		return err
	}
	*c = *newCollector(s, rep, scale)
	return nil
}
