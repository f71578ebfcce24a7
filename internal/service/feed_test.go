package service

import (
	"context"
	"log/slog"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"
	"trussmonitor/internal/instrumented"

	mqtt "github.com/eclipse/paho.mqtt.golang"
	"github.com/prometheus/client_golang/prometheus"
	dto "github.com/prometheus/client_model/go"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
	"trussmonitor/internal/store"
)

// gateSink is a pipeline sink that blocks every epoch until released: a
// reconciliation that takes as long as the test wants.
type gateSink struct {
	once    sync.Once
	entered chan struct{} // closed at the first epoch
	release chan struct{} // closed to let every epoch through
}

func newGateSink() *gateSink {
	return &gateSink{entered: make(chan struct{}), release: make(chan struct{})}
}

// Epoch blocks until the gate is released.
func (g *gateSink) Epoch(*pipeline.Result) {
	g.once.Do(func() { close(g.entered) })
	<-g.release
}

// isEntered reports whether an epoch reached the gate.
func (g *gateSink) isEntered() bool {
	select {
	case <-g.entered:
		return true
	default:
		return false
	}
}

// feedRig is a service on a broker of the test's own whose in-flight window
// is small: a message the monitor does not acknowledge holds one of its few
// places, and once they are all held the broker drops further messages
// (counted in Dropped) instead of delivering them.
type feedRig struct {
	t      *testing.T
	brk    *broker.Broker
	svc    *Service
	stop   func() error
	gate   *gateSink
	pub    mqtt.Client
	steps  []simulate.Step
	next   int
	sent   int64 // readings published and stored so far
	from   time.Time
	logs   *syncBuffer
	name   string
	window int    // the broker's in-flight window
	db     string // the database file
}

// newFeedRig starts the rig; queueSteps > 0 bounds the reconciliation
// queue to that many simulated seconds of readings (0: the default).
func newFeedRig(t *testing.T, clientID string, queueSteps int) *feedRig {
	t.Helper()
	const window = 8
	brk, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true, MaxInflight: window})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { brk.Close() })
	cfg := testConfig(t, t.TempDir(), clientID)
	cfg.Broker.Embedded = false
	cfg.Broker.URL = "tcp://" + brk.Addr()
	mon, err := instrumented.Load(cfg.Structures[0].Structure, cfg.Structures[0].Sensors)
	if err != nil {
		t.Fatal(err)
	}
	cfg.Epochs.QueueReadings = queueSteps * len(mon.Sensors.Channels())
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	logs := &syncBuffer{}
	svc, stop := startService(t, cfg, slog.New(slog.NewTextHandler(logs, nil)))
	gate := newGateSink()
	svc.Pipeline(mon.Structure.Name).AddSink(gate)
	// Released at the end whatever happens, so that shutdown can drain.
	t.Cleanup(func() {
		select {
		case <-gate.release:
		default:
			close(gate.release)
		}
	})
	waitSubscribedNow(t, svc)

	opt := simulate.DefaultOptions()
	opt.Seed = 11
	opt.Start = time.Now().UTC().Add(-30 * time.Minute).Truncate(time.Second)
	opt.Duration = 2 * time.Minute
	opt.Rate = time.Second
	opt.BadRate = 0
	gen, err := simulate.New(mon.Structure, mon.Sensors, opt)
	if err != nil {
		t.Fatal(err)
	}
	var steps []simulate.Step
	for st, err := range gen.All() {
		if err != nil {
			t.Fatal(err)
		}
		steps = append(steps, st)
	}
	pub := mqtt.NewClient(mqtt.NewClientOptions().AddBroker("tcp://" + brk.Addr()).SetClientID(clientID + "-logger"))
	if tok := pub.Connect(); !tok.WaitTimeout(30*time.Second) || tok.Error() != nil {
		t.Fatalf("logger connect: %v", tok.Error())
	}
	t.Cleanup(func() { pub.Disconnect(100) })
	return &feedRig{t: t, brk: brk, svc: svc, stop: stop, gate: gate, pub: pub, steps: steps, from: opt.Start,
		logs: logs, name: mon.Structure.Name, window: window, db: cfg.Database}
}

// publishStep publishes the next simulated second as one pack and waits
// until the service has stored it (it waits on progress: see waitStored).
func (r *feedRig) publishStep() {
	r.t.Helper()
	if r.next >= len(r.steps) {
		r.t.Fatalf("all %d simulated steps published", len(r.steps))
	}
	st := r.steps[r.next]
	r.next++
	tok := r.pub.Publish(publish.Topic(r.name), 1, false, publish.AppendPack(nil, st.Time, st.Readings))
	if !tok.WaitTimeout(30*time.Second) || tok.Error() != nil {
		r.t.Fatalf("publish: %v", tok.Error())
	}
	r.sent += int64(len(st.Readings))
	waitStored(r.t, r.svc, r.name, r.from, r.from.Add(time.Hour), r.sent)
}

// blockReconciliation publishes seconds until an epoch is held at the gate.
func (r *feedRig) blockReconciliation() {
	r.t.Helper()
	for !r.gate.isEntered() {
		r.publishStep()
	}
}

// counter is the value of a structure's series of a metric (0 if absent).
func (r *feedRig) metric(name string) float64 {
	r.t.Helper()
	mfs, err := r.svc.reg.Gather()
	if err != nil {
		r.t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			if labelOf(m, "structure") != r.name {
				continue
			}
			if c := m.GetCounter(); c != nil {
				return c.GetValue()
			}
			return m.GetGauge().GetValue()
		}
	}
	return 0
}

func labelOf(m *dto.Metric, name string) string {
	for _, l := range m.GetLabel() {
		if l.GetName() == name {
			return l.GetValue()
		}
	}
	return ""
}

// waitFed releases the gate and waits until every stored reading was fed
// to the pipeline or counted as dropped, and the queue is empty.
func (r *feedRig) waitFed() (fed, dropped int64) {
	r.t.Helper()
	close(r.gate.release)
	var last int64 = -1
	lastChange := time.Now()
	for {
		fed = r.svc.Pipeline(r.name).Stats().Readings
		dropped = int64(r.metric(metrics.ReconcileQueueDropped))
		if fed+dropped >= r.sent && r.metric(metrics.ReconcileQueueDepth) == 0 {
			return fed, dropped
		}
		if fed != last {
			last, lastChange = fed, time.Now()
		}
		if time.Since(lastChange) > time.Minute {
			r.t.Fatalf("%d readings fed and %d dropped of %d stored; no progress for a minute", fed, dropped, r.sent)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// TestAcknowledgementDoesNotWaitForReconciliation holds the reconciliation
// of one epoch (a sink that blocks) and publishes three times the broker's
// in-flight window, one message at a time, each once the previous is
// stored: they are all committed, and all acknowledged (else the broker,
// its window full, would have dropped the later ones and they would never
// be stored). Before the reconciliation queue the commit goroutine itself
// fed the pipeline, and the first message after the block was never
// committed.
func TestAcknowledgementDoesNotWaitForReconciliation(t *testing.T) {
	r := newFeedRig(t, "ack-test", 0)
	r.blockReconciliation()
	before := r.sent
	for range 3 * r.window {
		r.publishStep()
	}
	if d := r.brk.Dropped(); d != 0 {
		t.Fatalf("the broker dropped %d messages: acknowledgements were withheld", d)
	}
	if depth := r.metric(metrics.ReconcileQueueDepth); depth <= 0 {
		t.Errorf("queue depth %g while reconciliation is held and %d readings were committed since", depth, r.sent-before)
	}
	// Stopped while reconciliation is still held: the gate opens only once
	// the ingest has left the broker (only the logger stays connected), so
	// what is queued then must be fed by the shutdown, before it closes the
	// last epochs.
	released := make(chan struct{})
	go func() {
		defer close(released)
		for r.brk.Clients() > 1 {
			time.Sleep(5 * time.Millisecond)
		}
		close(r.gate.release)
	}()
	if err := r.stop(); err != nil {
		t.Fatal(err)
	}
	<-released
	ps := r.svc.Pipeline(r.name).Stats()
	if ps.Readings != r.sent || ps.Epochs != int64(r.next) || ps.Assembler.Late != 0 {
		t.Errorf("after shutdown: %d of %d stored readings fed, %d epochs for %d seconds, %d late; want every reading fed by the shutdown, one epoch a second",
			ps.Readings, r.sent, ps.Epochs, r.next, ps.Assembler.Late)
	}
	// Every epoch's result was stored before the service closed the store.
	st, err := store.Open(r.db, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	results := 0
	if err := st.Results(context.Background(), r.name, r.from, r.from.Add(time.Hour), func(store.Result) error { results++; return nil }); err != nil {
		t.Fatal(err)
	}
	if results != r.next {
		t.Errorf("%d epoch results stored by the shutdown, want %d (one a second)", results, r.next)
	}
	t.Logf("%d readings committed while one epoch's reconciliation was held; %d fed by the shutdown, %d epochs, %d results stored", r.sent-before, ps.Readings, ps.Epochs, results)
}

// TestFullReconcileQueueReadsBack makes the queue hold two seconds of
// readings and holds reconciliation while ten more seconds arrive: they
// are stored and acknowledged all the same, counted as overflow
// (shm_reconcile_queue_overflow_readings_total), and once reconciliation
// goes on they are read back from the store and fed exactly once, in
// order: every stored reading fed once, none late, one epoch per second,
// nothing dropped.
func TestFullReconcileQueueReadsBack(t *testing.T) {
	r := newFeedRig(t, "overflow-test", 2)
	perStep := len(r.steps[0].Readings)
	r.blockReconciliation()
	for range 10 {
		r.publishStep()
	}
	if d := r.brk.Dropped(); d != 0 {
		t.Fatalf("the broker dropped %d messages: acknowledgements were withheld", d)
	}
	over := r.metric(metrics.ReconcileQueueOverflow)
	if over < float64(8*perStep) {
		t.Errorf("%g readings counted as overflow; ten seconds of %d readings met a queue of two seconds held, want at least %d", over, perStep, 8*perStep)
	}
	if depth := r.metric(metrics.ReconcileQueueDepth); depth < over {
		t.Errorf("queue depth %g while %g readings wait in a gap", depth, over)
	}
	fed, dropped := r.waitFed()
	if dropped != 0 || fed != r.sent {
		t.Errorf("fed %d and dropped %d of %d stored readings; want each fed exactly once", fed, dropped, r.sent)
	}
	if err := r.stop(); err != nil {
		t.Fatal(err)
	}
	ps := r.svc.Pipeline(r.name).Stats()
	if ps.Epochs != int64(r.next) || ps.Assembler.Late != 0 || ps.Assembler.Incomplete != 0 {
		t.Errorf("%d epochs (%d incomplete) and %d late readings for %d published seconds; want one complete epoch a second, none late",
			ps.Epochs, ps.Assembler.Incomplete, ps.Assembler.Late, r.next)
	}
	if logs := r.logs.String(); !strings.Contains(logs, "reconciliation queue full") {
		t.Errorf("no log line on the full queue; log:\n%s", logs)
	}
	t.Logf("queue of %d readings: %d found it full and were read back; %d of %d stored readings fed, %d epochs", 2*perStep, int64(over), fed, r.sent, ps.Epochs)
}

// queueScenario is ten simulated seconds of the footbridge sent as in a
// logger whose second half of channels lags one second behind the first:
// messages of the first half at second k and of the second half at k-1
// alternate, so a gap's time range overlaps readings fed before it. Each
// message is stored (the real store) and offered to a feeder that is not
// running yet, with a queue of three messages.
func queueScenario(t *testing.T) (f *feeder, p *pipeline.Pipeline, st *store.Store, total int, inQueue int) {
	t.Helper()
	mon, err := instrumented.Load("../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml")
	if err != nil {
		t.Fatal(err)
	}
	opt := simulate.DefaultOptions()
	opt.Seed, opt.Start, opt.Duration, opt.Rate, opt.BadRate = 5, time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC), 10*time.Second, time.Second, 0
	gen, err := simulate.New(mon.Structure, mon.Sensors, opt)
	if err != nil {
		t.Fatal(err)
	}
	var steps [][]store.Reading
	for s, err := range gen.All() {
		if err != nil {
			t.Fatal(err)
		}
		var rs []store.Reading
		for _, r := range s.Readings {
			rs = append(rs, store.Reading{Channel: r.Channel, Time: s.Time, Value: r.Value})
		}
		steps = append(steps, rs)
	}
	st, err = store.Open(filepath.Join(t.TempDir(), "m.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	p, err = pipeline.New(mon.Model, mon.Sensors, pipeline.Config{Window: time.Second, MaxLateness: 5 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	met, err := metrics.New(prometheus.NewRegistry())
	if err != nil {
		t.Fatal(err)
	}
	half := len(steps[0]) / 2
	f = newFeeder(p, st, 3*half, time.Time{}, slog.New(slog.DiscardHandler), met)
	offer := func(rs []store.Reading) {
		if _, err := st.InsertReadings(context.Background(), mon.Structure.Name, rs); err != nil {
			t.Fatal(err)
		}
		f.offer(rs)
		total += len(rs)
	}
	for k := 0; k <= len(steps); k++ {
		if k < len(steps) {
			offer(steps[k][:half])
		}
		if k >= 1 {
			offer(steps[k-1][half:])
		}
		if k == 1 {
			inQueue = total // A at 0 and 1, B at 0: the queue is full
		}
	}
	return f, p, st, total, inQueue
}

// TestFeederReadsGapBackExactlyOnce: the readings that found the queue
// full are read back from the store and, with those queued before, fed
// exactly once and in an order the epoch assembler accepts (none late):
// ten complete epochs. Reading the gap's time range back without the
// per-channel filter would feed the first half's readings at the gap's
// first second twice.
func TestFeederReadsGapBackExactlyOnce(t *testing.T) {
	f, p, _, total, _ := queueScenario(t)
	go f.run(context.Background())
	f.close()
	p.Flush(context.Background())
	ps := p.Stats()
	if ps.Readings != int64(total) || ps.Assembler.Late != 0 || ps.Epochs != 10 || ps.Assembler.Incomplete != 0 {
		t.Errorf("fed %d of %d readings, %d late, %d epochs (%d incomplete); want each once, none late, 10 complete epochs",
			ps.Readings, total, ps.Assembler.Late, ps.Epochs, ps.Assembler.Incomplete)
	}
	if d := f.droppedTotal(); d != 0 {
		t.Errorf("%d readings dropped", d)
	}
}

// TestFeederCountsFailedReadBack: when the store cannot be read (closed
// here), the gap's readings are left out of live reconciliation and
// counted as dropped; what was queued in memory is still fed.
func TestFeederCountsFailedReadBack(t *testing.T) {
	f, p, st, total, inQueue := queueScenario(t)
	st.Close()
	go f.run(context.Background())
	f.close()
	if got := p.Stats().Readings; got != int64(inQueue) {
		t.Errorf("fed %d readings, want the %d queued in memory", got, inQueue)
	}
	if d := f.droppedTotal(); d != uint64(total-inQueue) {
		t.Errorf("%d readings counted as dropped, want the gap's %d", d, total-inQueue)
	}
}
