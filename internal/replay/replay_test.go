package replay_test

import (
	"bytes"
	"compress/gzip"
	"context"
	"encoding/csv"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/csvimport"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/replay"
	"trussmonitor/internal/report"
	"trussmonitor/internal/store"
)

const (
	structureFile = "../../testdata/footbridge/structure.yaml"
	sensorsFile   = "../../testdata/footbridge/sensors.yaml"
	recordedDay   = "../../testdata/replay/footbridge-day.csv.gz"
)

// The recorded day of testdata/replay/README.md: 2026-06-01, one reading
// per channel per minute, a 30 % loss of D2's E A from 14:00:00 UTC.
var (
	dayStart  = time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	dayEnd    = dayStart.Add(24 * time.Hour)
	faultTime = time.Date(2026, 6, 1, 14, 0, 0, 0, time.UTC)
)

// importDay stores the recorded day in a new store file the way "monitor
// import" does (csvimport.Read, sensors.Map.Validate, store.Commit in
// batches) and, when storeModel is set, records the structure file as the
// model in force from the start of the day, as the service does when it
// starts. It returns the store path.
func importDay(t testing.TB, storeModel bool) string {
	t.Helper()
	return importDayWithout(t, storeModel, nil)
}

// importDayWithout is importDay leaving out the readings drop reports true
// for (nil keeps every reading).
func importDayWithout(t testing.TB, storeModel bool, drop func(store.Reading) bool) string {
	t.Helper()
	pair, err := instrumented.Load(structureFile, sensorsFile)
	if err != nil {
		t.Fatal(err)
	}
	st, sm := pair.Structure, pair.Sensors
	f, err := os.Open(recordedDay)
	if err != nil {
		t.Fatalf("the recorded day %s is missing (see testdata/replay/README.md): %v", recordedDay, err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "monitor.db")
	db, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	ctx := context.Background()
	var batch []store.Reading
	commit := func() error {
		if len(batch) == 0 {
			return nil
		}
		_, err := db.Commit(ctx, store.Batch{Groups: []store.Group{{Structure: sm.StructureName(), Readings: batch}}})
		batch = batch[:0]
		return err
	}
	stats, err := csvimport.Read(zr, func(r csvimport.Record) error {
		if err := sm.Validate(r.Channel, r.Unit, r.Value); err != nil {
			return err
		}
		if rd := (store.Reading{Channel: r.Channel, Time: r.Time, Value: r.Value}); drop == nil || !drop(rd) {
			batch = append(batch, rd)
		}
		if len(batch) >= 5000 {
			return commit()
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if err := commit(); err != nil {
		t.Fatal(err)
	}
	if stats.Readings != 1440*46 {
		t.Fatalf("recorded day has %d readings, README says 1440 rows of 46 channels", stats.Readings)
	}
	if storeModel {
		content, err := os.ReadFile(structureFile)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := db.PutModel(ctx, st.Name, content, dayStart.Add(-time.Hour)); err != nil {
			t.Fatal(err)
		}
	}
	return path
}

// eventRow is one row of events.csv.
type eventRow struct {
	time                 time.Time
	rule, subject, kind  string
	causeKind, causeSubj [3]string
	line                 int
}

func readEvents(t *testing.T, dir string) []eventRow {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(dir, report.EventsFile))
	if err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	var out []eventRow
	for i, r := range recs[1:] {
		tm, err := time.Parse(time.RFC3339Nano, r[col["time"]])
		if err != nil {
			t.Fatalf("events.csv line %d: %v", i+2, err)
		}
		e := eventRow{time: tm, rule: r[col["rule"]], subject: r[col["subject"]], kind: r[col["kind"]], line: i + 2}
		for k := 0; k < 3; k++ {
			p := "cause" + string(rune('1'+k)) + "_"
			e.causeKind[k], e.causeSubj[k] = r[col[p+"kind"]], r[col[p+"subject"]]
		}
		out = append(out, e)
	}
	return out
}

// statistical reports whether an event is one of the two statistical alarms.
func statistical(e eventRow) bool {
	return e.rule == string(alerts.RuleMemberDiverging) || e.rule == string(alerts.RuleFitRejected)
}

// TestRecordedDayFault replays the recorded day (stored model version, 60 s
// epochs) and checks the alarms against the injected fault of
// testdata/replay/README.md.
//
// Tolerance: an epoch [t, t+60 s) is stamped with its end t+60 s, and
// both statistical rules need their condition to hold for 2 minutes
// (alerts.DivergingFor, alerts.RejectedFor) before they fire, so the first
// faulty epoch is stamped 14:01:00 and the alarm fires at 14:03:00. The
// test accepts a raise in [14:00, 14:00 + window + for-duration + one
// reading interval] = [14:00, 14:04] and none before 14:00.
func TestRecordedDayFault(t *testing.T) {
	path := importDay(t, true)
	out1, out2 := t.TempDir(), t.TempDir()
	opt := replay.Options{
		DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile,
		OutDir: out1, Window: time.Minute,
	}
	sum, err := replay.Run(context.Background(), opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("model %s (%s); readings %d of %d; epochs %d %v; events %d, raised %v; %v",
		sum.ModelVersion[:12], sum.ModelSource, sum.Readings, sum.Total, sum.Epochs, sum.ByOutcome, sum.Events, sum.Raised, sum.Elapsed)
	for _, w := range sum.Warnings {
		t.Logf("warning: %s", w)
	}
	content, _ := os.ReadFile(structureFile)
	if sum.ModelVersion != store.ModelHash(content) || !strings.HasPrefix(sum.ModelSource, "stored version") {
		t.Errorf("model %s from %q; want the stored version %s", sum.ModelVersion, sum.ModelSource, store.ModelHash(content))
	}
	if sum.Total != 1440*46 || sum.Readings != sum.Total {
		t.Errorf("fed %d of %d readings; want all 66240", sum.Readings, sum.Total)
	}
	if sum.Epochs != 1440 {
		t.Errorf("%d epochs; want 1440 (one per minute)", sum.Epochs)
	}

	events := readEvents(t, out1)
	latest := faultTime.Add(time.Minute + alerts.DivergingFor + time.Minute)
	var first *eventRow
	var d2 *eventRow
	for i, e := range events {
		t.Logf("event %s %s %s %s causes %v %v", e.time.Format(time.TimeOnly), e.kind, e.rule, e.subject, e.causeKind, e.causeSubj)
		if !statistical(e) || e.kind != string(alerts.Raised) {
			continue
		}
		if e.time.Before(faultTime) {
			t.Errorf("events.csv line %d: %s %s raised at %s, before the fault at 14:00", e.line, e.rule, e.subject, e.time.Format(time.RFC3339))
			continue
		}
		if first == nil {
			first = &events[i]
		}
		if d2 == nil && e.rule == string(alerts.RuleMemberDiverging) && e.subject == "D2" {
			d2 = &events[i]
		}
	}
	switch {
	case first == nil:
		t.Fatal("no MemberDiverging or FitRejected alarm raised after the fault")
	case first.time.After(latest):
		t.Errorf("first alarm %s %s at %s; want by %s", first.rule, first.subject, first.time.Format(time.TimeOnly), latest.Format(time.TimeOnly))
	}
	if d2 == nil {
		t.Fatal("no MemberDiverging alarm on D2")
	}
	if d2.time.After(latest) {
		t.Errorf("MemberDiverging D2 raised at %s; want by %s", d2.time.Format(time.TimeOnly), latest.Format(time.TimeOnly))
	}
	// D2 ranked first. D2 lies in a statically determinate panel: the
	// signature of a change of its E A and that of a bias of its gauges
	// are the same unit vector (README "Expected outcome"), so the two tie
	// and the first two causes must be exactly these two, of D2.
	for _, e := range []*eventRow{first, d2} {
		top := map[string]bool{e.causeKind[0] + " " + e.causeSubj[0]: true, e.causeKind[1] + " " + e.causeSubj[1]: true}
		if !top["stiffness_change D2"] || !top["gauge_fault D2"] {
			t.Errorf("events.csv line %d (%s %s): first causes %v of %v; want D2's stiffness change and D2's gauge fault", e.line, e.rule, e.subject, e.causeKind[:2], e.causeSubj[:2])
		}
	}

	// Byte-identical output for the same readings and model.
	opt.OutDir = out2
	if _, err := replay.Run(context.Background(), opt); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{report.EpochsFile, report.EventsFile, report.HTMLFile} {
		a, err1 := os.ReadFile(filepath.Join(out1, name))
		b, err2 := os.ReadFile(filepath.Join(out2, name))
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s differs between two replays of the same readings and model", name)
		} else {
			t.Logf("%s: %d bytes, identical across two runs", name, len(a))
		}
	}
	html, _ := os.ReadFile(filepath.Join(out1, report.HTMLFile))
	if !bytes.Contains(html, []byte(sum.ModelVersion)) {
		t.Errorf("index.html does not name the model version %s", sum.ModelVersion)
	}
	if !bytes.Contains(html, []byte("not a safety verdict")) {
		t.Error("index.html lacks the safety caution")
	}
	// The footbridge's fatigue gauges get a histogram and a damage plot,
	// recounted from the raw readings (the import stored no histograms),
	// with the fatigue caution.
	for _, want := range []string{`id="fatigue-hist-B4_a"`, `id="fatigue-damage-D1_b"`, "not a design check or an assessment", "recounted from the raw readings"} {
		if !bytes.Contains(html, []byte(want)) {
			t.Errorf("index.html lacks %s", want)
		}
	}
}

// reducedD2 writes a copy of the footbridge structure file in which D2 has
// 70 % of its section area (the "what if D2 lost 30 % of its stiffness"
// model) and returns its path.
func reducedD2(t *testing.T) string {
	t.Helper()
	data, err := os.ReadFile(structureFile)
	if err != nil {
		t.Fatal(err)
	}
	s := string(data)
	for _, r := range [][2]string{
		{"sections:\n", "sections:\n  - id: web_reduced\n    description: SHS 120x120x6.3 at 70 % of its area (what-if)\n    area: 1974 mm2\n    radius_of_gyration: 45.5 mm\n    buckling_curve: a\n    material: steel\n"},
		{"{id: D2, from: U1, to: L2, section: web,", "{id: D2, from: U1, to: L2, section: web_reduced,"},
	} {
		if strings.Count(s, r[0]) != 1 {
			t.Fatalf("structure file: %q not found once", r[0])
		}
		s = strings.Replace(s, r[0], r[1], 1)
	}
	path := filepath.Join(t.TempDir(), "structure-d2-70.yaml")
	if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// countRaised counts raised statistical alarms before and from the fault.
func countRaised(events []eventRow) (before, after int) {
	for _, e := range events {
		if !statistical(e) || e.kind != string(alerts.Raised) {
			continue
		}
		if e.time.Before(faultTime) {
			before++
		} else {
			after++
		}
	}
	return before, after
}

// residuals is a pipeline sink that averages one member's residual
// (measured minus predicted from the recorded loads, unknown loads not
// included) and its prediction over fitted epochs before and from the
// fault.
type residuals struct {
	member       string
	sum, pred, n [2]float64
}

func (r *residuals) Epoch(res *pipeline.Result) {
	if res.Outcome != reconcile.OutcomeAccepted && res.Outcome != reconcile.OutcomeRejected {
		return
	}
	k := 0
	if !res.Time.Add(-time.Minute).Before(faultTime) { // the epoch [t-60 s, t) starts at or after 14:00
		k = 1
	}
	for _, m := range res.Members {
		if m.Member == r.member && m.Available {
			r.sum[k] += m.ResidualN
			r.pred[k] += m.PredictedN
			r.n[k]++
		}
	}
}

func (r *residuals) mean(k int) (resid, pred float64) { return r.sum[k] / r.n[k], r.pred[k] / r.n[k] }

// deadForce returns the dead-load force of member id (tension positive):
// the influence of the dead pattern times its permanent factor.
func deadForce(t *testing.T, id string) float64 {
	t.Helper()
	pair, err := instrumented.Load(structureFile, sensorsFile)
	if err != nil {
		t.Fatal(err)
	}
	st, sm := pair.Structure, pair.Sensors
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	i, ok := st.MemberIndex(id)
	if !ok {
		t.Fatalf("no member %s", id)
	}
	h, err := m.Influence([]int{i}, []model.Input{{Kind: model.PatternInput, Name: "dead"}})
	if err != nil {
		t.Fatal(err)
	}
	return h.At(0, 0) * sm.PermanentLoads()["dead"]
}

// TestWhatIfModel replays the day against a model in which D2 already has
// 70 % of its area (--model), next to the stored model.
//
// What such a model can and cannot explain follows from N = E A epsilon
// and the zero reading (common practice; derivation, not a published
// value): D2's gauges were zeroed under the dead load N_d with the intact
// E A, so they read epsilon - epsilon_0 = N / (0.7 E A) - N_d / (E A) after
// the loss. Converted with the what-if 0.7 E A that is N - 0.7 N_d; the
// prediction of the change since the zero reading is N - N_d (D2 lies in a
// statically determinate panel: its force does not depend on its
// stiffness). The residual after 14:00 is therefore 0.3 N_d, whatever the
// live load, and before 14:00 it is 0.7 L - L = -0.3 L with L the live
// share (the prediction). A model with the reduced area throughout cannot
// remove the D2 alarm: the dead load went in at the intact stiffness. The
// test checks both residuals and that the alarm on D2 stays.
func TestWhatIfModel(t *testing.T) {
	path := importDay(t, true)
	base, whatIf := t.TempDir(), t.TempDir()
	model := reducedD2(t)
	r0, r1 := &residuals{member: "D2"}, &residuals{member: "D2"}
	opt := replay.Options{DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile, OutDir: base, Window: time.Minute, Sinks: []pipeline.Sink{r0}}
	if _, err := replay.Run(context.Background(), opt); err != nil {
		t.Fatal(err)
	}
	opt.OutDir, opt.ModelFile, opt.Sinks = whatIf, model, []pipeline.Sink{r1}
	sum, err := replay.Run(context.Background(), opt)
	if err != nil {
		t.Fatal(err)
	}
	content, _ := os.ReadFile(model)
	if sum.ModelVersion != store.ModelHash(content) {
		t.Errorf("model version %s; want the hash of %s", sum.ModelVersion, model)
	}
	if len(sum.Warnings) == 0 || !strings.Contains(sum.Warnings[0], "not the stored model version") {
		t.Errorf("warnings %q; want a note that the replay is not against the stored model", sum.Warnings)
	}
	nd := deadForce(t, "D2")
	for k, name := range []string{"before 14:00", "from 14:00"} {
		e0, p0 := r0.mean(k)
		e1, p1 := r1.mean(k)
		t.Logf("D2 %s: mean residual %.0f N (stored model), %.0f N (D2 at 70 %%); mean prediction %.0f N; N_d = %.0f N", name, e0, e1, p1, nd)
		if abs(p0-p1) > 1e-6*(abs(p0)+1) {
			t.Errorf("D2 %s: predictions differ between the models (%g, %g N); D2's force should not depend on its stiffness", name, p0, p1)
		}
		// The same strain converted with 0.7 E A: measured force 0.7
		// times, so r1 = 0.7 (r0 + p) - p.
		if want := 0.7*(e0+p0) - p0; abs(e1-want) > 1e-6*abs(want)+1e-6 {
			t.Errorf("D2 %s: what-if residual %.3f N; want 0.7 (r + p) - p = %.3f N from the stored-model replay", name, e1, want)
		}
	}
	// From 14:00 the what-if residual is 0.3 N_d plus the unmeasured crowd
	// pattern's share of D2 (not in the prediction), which the stored-model
	// residual before the fault shows (mean c0 below, about 0.7 kN).
	// Tolerance: the crowd is a slow random factor, so its afternoon mean
	// may differ from its morning mean; allow 2 |c0| + 300 N.
	c0, _ := r0.mean(0)
	if e1, _ := r1.mean(1); abs(e1-0.3*nd) > 2*abs(c0)+300 {
		t.Errorf("what-if residual of D2 from 14:00: %.0f N; want 0.3 N_d = %.0f N within %.0f N", e1, 0.3*nd, 2*abs(c0)+300)
	}
	ev0, ev1 := readEvents(t, base), readEvents(t, whatIf)
	b0, a0 := countRaised(ev0)
	b1, a1 := countRaised(ev1)
	t.Logf("raised statistical alarms before/after 14:00: stored model %d/%d, D2 at 70 %% %d/%d; epochs %v", b0, a0, b1, a1, sum.ByOutcome)
	perSubject := map[string]int{}
	for _, e := range ev1 {
		if e.kind == string(alerts.Raised) {
			perSubject[e.rule+" "+e.subject]++
		}
	}
	t.Logf("what-if raised events by rule and subject: %v", perSubject)
	if perSubject["MemberDiverging D2"] == 0 {
		t.Error("against the D2-at-70 % model D2 no longer alarms; its residual 0.3 N_d should keep it")
	}
}

// TestStructureFileWithoutStoredModel replays imported readings (no model
// version stored) against --structure, and names the missing model without
// it.
func TestStructureFileWithoutStoredModel(t *testing.T) {
	path := importDay(t, false)
	ctx := context.Background()
	from, to := faultTime.Add(-time.Hour), faultTime.Add(time.Hour)
	_, err := replay.Run(ctx, replay.Options{DB: path, From: from, To: to, SensorsFile: sensorsFile})
	if err == nil || !strings.Contains(err.Error(), "no model version") || !strings.Contains(err.Error(), "--structure") {
		t.Errorf("without a stored model or --structure: %v; want an error naming the missing model and --structure", err)
	}
	sum, err := replay.Run(ctx, replay.Options{DB: path, From: from, To: to, SensorsFile: sensorsFile, StructureFile: structureFile})
	if err != nil {
		t.Fatal(err)
	}
	if sum.Total != 120*46 || !strings.Contains(sum.ModelSource, "no model version stored") {
		t.Errorf("total %d (want 5520), source %q", sum.Total, sum.ModelSource)
	}
	if sum.OutDir != "" {
		t.Errorf("wrote %s without an OutDir", sum.OutDir)
	}
}

// TestEmptyPeriod checks that a period without readings says how many the
// store holds and their span.
func TestEmptyPeriod(t *testing.T) {
	path := importDay(t, true)
	_, err := replay.Run(context.Background(), replay.Options{
		DB: path, From: dayEnd, To: dayEnd.Add(time.Hour), SensorsFile: sensorsFile,
	})
	var ep *replay.EmptyPeriodError
	if !errors.As(err, &ep) {
		t.Fatalf("error %v; want an EmptyPeriodError", err)
	}
	if ep.Stored != 1440*46 || !ep.First.Equal(dayStart) || !ep.Last.Equal(dayEnd.Add(-time.Minute)) {
		t.Errorf("stored %d from %s to %s; want 66240 from 00:00 to 23:59", ep.Stored, ep.First, ep.Last)
	}
	for _, want := range []string{"66240 readings", "2026-06-01T00:00:00Z", "2026-06-01T23:59:00Z"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q lacks %q", err, want)
		}
	}
}

// TestOptionErrors checks the errors of bad options.
func TestOptionErrors(t *testing.T) {
	cases := []struct {
		name string
		opt  replay.Options
		want string
	}{
		{"no db", replay.Options{From: dayStart, To: dayEnd, SensorsFile: sensorsFile}, "store file"},
		{"no sensors", replay.Options{DB: "x.db", From: dayStart, To: dayEnd}, "sensor map"},
		{"no period", replay.Options{DB: "x.db", SensorsFile: sensorsFile}, "period"},
		{"reversed", replay.Options{DB: "x.db", From: dayEnd, To: dayStart, SensorsFile: sensorsFile}, "before or when it starts"},
		{"negative window", replay.Options{DB: "x.db", From: dayStart, To: dayEnd, SensorsFile: sensorsFile, Window: -time.Second}, "negative"},
		{"missing store", replay.Options{DB: "none.db", From: dayStart, To: dayEnd, SensorsFile: sensorsFile}, "none.db"},
		{"missing sensor file", replay.Options{DB: "x.db", From: dayStart, To: dayEnd, SensorsFile: "nope.yaml"}, "nope.yaml"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := replay.Run(context.Background(), c.opt)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v; want one containing %q", err, c.want)
			}
		})
	}
}

func abs(x float64) float64 {
	if x < 0 {
		return -x
	}
	return x
}

// cancelAfter is a sink that cancels the replay's context after n epochs.
type cancelAfter struct {
	n      int
	cancel context.CancelFunc
}

func (c *cancelAfter) Epoch(*pipeline.Result) {
	if c.n--; c.n == 0 {
		c.cancel()
	}
}

// TestInterrupted cancels a replay part-way: it stops with an error that
// says how far it got and wraps context.Canceled, and writes no report.
func TestInterrupted(t *testing.T) {
	path := importDay(t, true)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	out := filepath.Join(t.TempDir(), "report")
	_, err := replay.Run(ctx, replay.Options{DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile, OutDir: out,
		Window: time.Minute, Batch: 460, Sinks: []pipeline.Sink{&cancelAfter{n: 100, cancel: cancel}}})
	if !errors.Is(err, context.Canceled) || !strings.Contains(err.Error(), "interrupted after") {
		t.Fatalf("error %v; want an interruption wrapping context.Canceled", err)
	}
	t.Log(err)
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("report folder written after an interruption: %v", err)
	}
}

// TestModelVersions checks which stored model version a replay uses and
// the notes it gives: the version in force at From, a note when the model
// changed within the period, and a note when --structure differs from the
// stored version.
func TestModelVersions(t *testing.T) {
	path := importDay(t, true)
	ctx := context.Background()
	v2 := reducedD2(t)
	content2, err := os.ReadFile(v2)
	if err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := db.PutModel(ctx, "alder-creek", content2, faultTime.Add(2*time.Hour)); err != nil {
		t.Fatal(err)
	}
	db.Close()
	content1, _ := os.ReadFile(structureFile)

	// A period across the change: the version at From, with a note.
	sum, err := replay.Run(ctx, replay.Options{DB: path, From: faultTime, To: faultTime.Add(3 * time.Hour), SensorsFile: sensorsFile})
	if err != nil {
		t.Fatal(err)
	}
	if sum.ModelVersion != store.ModelHash(content1) {
		t.Errorf("model %s; want the version in force at From, %s", sum.ModelVersion, store.ModelHash(content1))
	}
	if len(sum.Warnings) != 1 || !strings.Contains(sum.Warnings[0], "changed within the period") {
		t.Errorf("warnings %q; want one about the model change", sum.Warnings)
	}
	// After the change: the second version; --structure (the first) differs.
	sum, err = replay.Run(ctx, replay.Options{DB: path, From: faultTime.Add(3 * time.Hour), To: faultTime.Add(4 * time.Hour),
		SensorsFile: sensorsFile, StructureFile: structureFile})
	if err != nil {
		t.Fatal(err)
	}
	if sum.ModelVersion != store.ModelHash(content2) {
		t.Errorf("model %s; want the second version %s", sum.ModelVersion, store.ModelHash(content2))
	}
	if len(sum.Warnings) != 1 || !strings.Contains(sum.Warnings[0], "differs from the stored model version") {
		t.Errorf("warnings %q; want one about --structure differing from the stored version", sum.Warnings)
	}
}

// TestModelRecordedAfterFirstReading: readings that predate the first
// stored model version (a logger's backlog, or the demo) replay against
// that first version, with a note, instead of failing.
func TestModelRecordedAfterFirstReading(t *testing.T) {
	path := importDay(t, false)
	ctx := context.Background()
	content, err := os.ReadFile(structureFile)
	if err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := db.PutModel(ctx, "alder-creek", content, dayStart.Add(30*time.Minute)); err != nil {
		t.Fatal(err)
	}
	db.Close()
	sum, err := replay.Run(ctx, replay.Options{DB: path, From: dayStart, To: dayStart.Add(2 * time.Hour), SensorsFile: sensorsFile, OutDir: t.TempDir()})
	if err != nil {
		t.Fatal(err)
	}
	if sum.ModelVersion != store.ModelHash(content) {
		t.Errorf("model %s, want the stored version %s", sum.ModelVersion, store.ModelHash(content))
	}
	if len(sum.Warnings) != 1 || !strings.Contains(sum.Warnings[0], "no model version was recorded before the period's first reading") {
		t.Errorf("warnings %q; want one about the first version", sum.Warnings)
	}
	// A version recorded only after the period is not used.
	_, err = replay.Run(ctx, replay.Options{DB: path, From: dayStart, To: dayStart.Add(20 * time.Minute), SensorsFile: sensorsFile, OutDir: t.TempDir()})
	if err == nil || !strings.Contains(err.Error(), "no model version") {
		t.Errorf("period before any model version: err %v, want one saying no model version", err)
	}
}

// TestReplayFromBlocks replays the recorded day from rows, compacts the
// store into blocks, replays again, and requires byte-identical epochs.csv
// and events.csv: the block store changes where readings sit, not what a
// replay computes.
func TestReplayFromBlocks(t *testing.T) {
	path := importDay(t, true)
	out1, out2 := t.TempDir(), t.TempDir()
	opt := replay.Options{DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile, OutDir: out1, Window: time.Minute}
	if _, err := replay.Run(context.Background(), opt); err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	cs, err := db.Compact(context.Background(), dayEnd)
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	if cs.Readings != 1440*46 || cs.Blocks != 24*46 {
		t.Fatalf("compacted %+v; want every reading of the day in 24 blocks per channel", cs)
	}
	opt.OutDir = out2
	if _, err := replay.Run(context.Background(), opt); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{report.EpochsFile, report.EventsFile} {
		a, err1 := os.ReadFile(filepath.Join(out1, name))
		b, err2 := os.ReadFile(filepath.Join(out2, name))
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s differs between the row store and the block store", name)
		}
	}
}
