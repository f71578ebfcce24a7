package ingest

import (
	"context"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/store"
)

// labelObserver records the structure label values the metrics would get.
type labelObserver struct {
	countingObserver
	mu         sync.Mutex
	structures map[string]bool
}

func newLabelObserver() *labelObserver {
	return &labelObserver{countingObserver: *newCountingObserver(), structures: map[string]bool{}}
}

func (o *labelObserver) note(s string) {
	o.mu.Lock()
	o.structures[s] = true
	o.mu.Unlock()
}

func (o *labelObserver) MessageHandled(s, outcome string) {
	o.note(s)
	o.countingObserver.MessageHandled(s, outcome)
}

func (o *labelObserver) Rejected(s, reason string) {
	o.note(s)
	o.countingObserver.Rejected(s, reason)
}

func (o *labelObserver) labels() []string {
	o.mu.Lock()
	defer o.mu.Unlock()
	var out []string
	for s := range o.structures {
		out = append(out, s)
	}
	sort.Strings(out)
	return out
}

// waitSubscribed waits until the ingester's subscription is confirmed
// (a message published before that has no subscriber and is dropped).
func waitSubscribed(t *testing.T, in *Ingester) {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for in.Stats().Subscribed == 0 {
		if time.Now().After(deadline) {
			t.Fatal("ingest not subscribed within 30 s")
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// waitDeadLetters waits until at least n dead letters (rows) are stored.
func waitDeadLetters(t *testing.T, st *store.Store, n int) map[string]int64 {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for {
		c, err := st.CountDeadLetters(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		var total int64
		for _, v := range c {
			total += v
		}
		if total >= int64(n) || time.Now().After(deadline) {
			return c
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// TestTimeWindow: readings stamped far ahead of the receiver's clock or
// far behind it (defaults: 10 minutes ahead, 30 days behind) are dead
// letters of their own reason, and the last-reading time only moves with
// accepted readings (issue 10, defect 4: a reading stamped 2255 was stored
// and made the channel's silence alarm impossible).
func TestTimeWindow(t *testing.T) {
	b := embeddedBroker(t)
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	obs := newCountingObserver()
	now := time.Now().UTC().Truncate(time.Second)
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "window"}, Deps{
		Store: st, Registries: alderRegistry(), Observer: obs,
	})
	waitSubscribed(t, in)
	pub := newPublisher(t, b.Addr(), "window-pub")
	bad := []time.Time{
		time.Date(2255, 1, 1, 0, 0, 0, 0, time.UTC), // the trial's reading
		now.Add(11 * time.Minute),                   // just past the 10 minutes ahead
		time.Date(1989, 6, 1, 0, 0, 0, 0, time.UTC),
		time.Date(2001, 6, 1, 0, 0, 0, 0, time.UTC),
		now.Add(-31 * 24 * time.Hour), // past the 30-day backlog
	}
	for _, tm := range bad {
		pub.publish("shm/alder-creek/g00", fmt.Appendf(nil, `[{"bt":%s,"u":"/","v":1}]`, senmlTime(tm)))
	}
	good := []time.Time{now.Add(-29 * 24 * time.Hour), now.Add(9 * time.Minute), now}
	for _, tm := range good {
		pub.publish("shm/alder-creek/g00", fmt.Appendf(nil, `[{"bt":%s,"u":"/","v":2}]`, senmlTime(tm)))
	}
	got := waitCount(t, st, "alder-creek", int64(len(good)), 30*time.Second)
	dl := waitDeadLetters(t, st, len(bad))
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	n, _ := st.CountReadings(context.Background(), "alder-creek", time.Time{}, time.Time{})
	if got != int64(len(good)) || n != int64(len(good)) {
		t.Errorf("stored %d readings, want %d (only those inside the window)", n, len(good))
	}
	if dl["outside_time_window"] != int64(len(bad)) {
		t.Errorf("dead letters by reason %v; want %d outside_time_window", dl, len(bad))
	}
	obs.mu.Lock()
	last := obs.last["g00"]
	obs.mu.Unlock()
	if !last.Equal(now.Add(9 * time.Minute)) {
		t.Errorf("last reading of g00 is %s; want the latest accepted reading %s", last, now.Add(9*time.Minute))
	}
}

// TestConflictingReadings: a redelivery (same channel, time and value) is a
// duplicate; a different value at the same key is a dead letter
// conflicting_reading, in one pack, across messages, and for two times
// 0.4 us apart that share a key at the store's 1 us resolution (issue 10,
// defect 5: the conflicting values were counted as duplicates).
func TestConflictingReadings(t *testing.T) {
	b := embeddedBroker(t)
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	obs := newCountingObserver()
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "conflict"}, Deps{
		Store: st, Registries: alderRegistry(), Observer: obs,
	})
	waitSubscribed(t, in)
	pub := newPublisher(t, b.Addr(), "conflict-pub")
	tm := time.Now().UTC().Truncate(time.Second)
	ts := senmlTime(tm)
	msgs := []struct{ topic, payload string }{
		// One pack: the second record conflicts with the first.
		{"shm/alder-creek", `[{"bt":` + ts + `,"n":"g00","u":"/","v":1},{"n":"g00","v":2}]`},
		// A later message with a third value.
		{"shm/alder-creek/g00", `[{"bt":` + ts + `,"u":"/","v":3}]`},
		// A redelivery of the first: a duplicate.
		{"shm/alder-creek/g00", `[{"bt":` + ts + `,"u":"/","v":1}]`},
		// 0.4 us apart on g01: one key at 1 us resolution, two values.
		{"shm/alder-creek/g01", fmt.Sprintf(`[{"bt":%d.0000010,"u":"/","v":5}]`, tm.Unix())},
		{"shm/alder-creek/g01", fmt.Sprintf(`[{"bt":%d.0000014,"u":"/","v":6}]`, tm.Unix())},
	}
	for _, m := range msgs {
		pub.publish(m.topic, []byte(m.payload))
	}
	waitCount(t, st, "alder-creek", 2, 30*time.Second)
	dl := waitDeadLetters(t, st, 3)
	deadline := time.Now().Add(30 * time.Second)
	for {
		msgsSeen, _, _ := obs.snapshot()
		total := 0
		for _, v := range msgsSeen {
			total += v
		}
		if total >= len(msgs) || time.Now().After(deadline) {
			break
		}
		time.Sleep(20 * time.Millisecond)
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	var stored []store.Reading
	st.ReadReadings(context.Background(), "alder-creek", time.Time{}, time.Time{}, func(r store.Reading) error {
		stored = append(stored, r)
		return nil
	})
	if len(stored) != 2 || stored[0].Value != 1 || stored[1].Value != 5 {
		t.Errorf("stored %+v; want g00=1 and g01=5, the first values", stored)
	}
	if dl["conflicting_reading"] != 3 {
		t.Errorf("dead letters by reason %v; want 3 conflicting_reading (one per message with a conflict)", dl)
	}
	_, rds, _ := obs.snapshot()
	if rds[OutcomeDuplicate] != 1 {
		t.Errorf("readings by outcome %v; want exactly 1 duplicate (the redelivery)", rds)
	}
}

// TestUnknownStructureOneLabel: readings for structures that are not
// configured are dead letters unknown_structure, and the metrics see one
// label value for all of them, not a new structure label per name (issue
// 10, defect 8).
func TestUnknownStructureOneLabel(t *testing.T) {
	b := embeddedBroker(t)
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	obs := newLabelObserver()
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "unknown", SubscribeAll: true}, Deps{
		Store: st, Registries: alderRegistry(), Observer: obs,
	})
	waitSubscribed(t, in)
	pub := newPublisher(t, b.Addr(), "unknown-pub")
	ts := senmlTime(time.Now())
	for i := range 20 {
		pub.publish(fmt.Sprintf("shm/forged-%d/g00", i), []byte(`[{"bt":`+ts+`,"u":"/","v":1}]`))
	}
	pub.publish("shm/alder-creek/g00", []byte(`[{"bt":`+ts+`,"u":"/","v":1}]`))
	waitCount(t, st, "alder-creek", 1, 30*time.Second)
	dl := waitDeadLetters(t, st, 20)
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	if dl[string(ReasonUnknownStructure)] != 20 {
		t.Errorf("dead letters %v; want 20 unknown_structure", dl)
	}
	if got := obs.labels(); len(got) != 2 || got[0] != UnknownStructureLabel || got[1] != "alder-creek" {
		t.Errorf("structure label values %q; want only %q and alder-creek", got, UnknownStructureLabel)
	}
	// A topic that matches none of the subscriptions (a session subscribed
	// to more by an earlier program, or a broker bridge) reaches the
	// default handler: counted as bad_topic under the same one label.
	lo := newLabelObserver()
	in2, err := New(Config{Broker: "tcp://127.0.0.1:1", ClientID: "decode-only"}, Deps{Store: st, Registries: alderRegistry(), Observer: lo})
	if err != nil {
		t.Fatal(err)
	}
	for _, topic := range []string{"shm/alder-creek/g00/extra", "other/alder-creek/g00", "shm//g00"} {
		m := in2.decode(received{msg: fakeMessage{topic, []byte(`[{"v":1}]`)}, at: time.Now()})
		if len(m.dead) != 1 || m.dead[0].Reason != string(ReasonBadTopic) || m.structure != UnknownStructureLabel {
			t.Errorf("topic %s: structure label %q, dead letters %+v; want one bad_topic under %q", topic, m.structure, m.dead, UnknownStructureLabel)
		}
	}
}

// TestDeadLetterGrowthBounded: 1,000 malformed 60 KB messages grow the
// database by a small bounded amount: a dead letter keeps a bounded excerpt
// of the payload, not the payload (issue 10, defect 7: they grew it from 17
// MB to 103 MB).
func TestDeadLetterGrowthBounded(t *testing.T) {
	b := embeddedBroker(t)
	path := filepath.Join(t.TempDir(), "m.db")
	st := openStore(t, path)
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "growth"}, Deps{
		Store: st, Registries: alderRegistry(),
	})
	waitSubscribed(t, in)
	pub := newPublisher(t, b.Addr(), "growth-pub")
	const n, size = 1000, 60 << 10
	filler := make([]byte, size)
	for i := range filler {
		filler[i] = 'a' + byte(i%26)
	}
	for i := range n {
		// Distinct messages (the number is in the first bytes), so repeat
		// counting does not fold them into one row.
		p := fmt.Appendf(nil, `[{"v":%d,"x":"%s`, i, filler)[:size]
		if err := pub.publish("shm/alder-creek/g00", p); err != nil {
			t.Fatal(err)
		}
	}
	dl := waitDeadLetters(t, st, n)
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	if dl["malformed_json"] != n {
		t.Errorf("dead letters %v; want %d malformed_json", dl, n)
	}
	st.Close() // checkpoints the WAL into the file
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	// Bound: the 1 KiB excerpt, the detail (at most 1 KiB) and the row's
	// other columns, for each of the 1,000 rows: under 2.5 MB in all,
	// against 60 MB of payload received.
	const bound = 2_500_000
	t.Logf("1,000 malformed 60 KB messages: database %d bytes", fi.Size())
	if fi.Size() > bound {
		t.Errorf("database is %d bytes after %d dead letters of %d bytes; want at most %d", fi.Size(), n, size, bound)
	}
}

// TestConnectFailureLogged: with a wrong password against the embedded
// broker with authentication, the refusal is logged at once with the
// broker's reason (issue 10, defect 2: no log line at all for 75 s).
func TestConnectFailureLogged(t *testing.T) {
	b, err := broker.Start(broker.Config{Address: "127.0.0.1:0", Users: map[string]string{"monitor": "right-password"}})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	var logs safeBuffer
	_, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "wrong-password", Username: "monitor", Password: "wrong-password"}, Deps{
		Store: st, Registries: alderRegistry(), Logger: slog.New(slog.NewTextHandler(&logs, nil)),
	})
	defer stop()
	// Progress, not the wall clock: the first attempt's refusal must be
	// logged; 60 s is a generous bound for one connection attempt.
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if l := strings.ToLower(logs.String()); strings.Contains(l, "bad user name or password") || strings.Contains(l, "not authorized") {
			t.Logf("logged: %s", strings.SplitN(logs.String(), "\n", 2)[0])
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	t.Fatalf("no log line naming the refused credentials within 60 s; log:\n%s", logs.String())
}

// TestPackPerRecord: a pack is accepted per record, as README.md and
// docs/api.md say: the good records are stored, the bad ones become one dead
// letter per reason, and the message is counted as stored (issue 10,
// defect 6: the README said a pack is accepted or refused whole).
func TestPackPerRecord(t *testing.T) {
	b := embeddedBroker(t)
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	obs := newCountingObserver()
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "pack"}, Deps{Store: st, Registries: alderRegistry(), Observer: obs})
	waitSubscribed(t, in)
	pub := newPublisher(t, b.Addr(), "pack-pub")
	ts := senmlTime(time.Now())
	pub.publish("shm/alder-creek", []byte(`[{"bt":`+ts+`,"n":"g01","u":"/","v":1},{"n":"g02","u":"/","v":2},{"n":"t1","u":"Cel","v":400}]`))
	waitCount(t, st, "alder-creek", 2, 30*time.Second)
	waitDeadLetters(t, st, 1)
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	ds, _ := st.ListDeadLetters(context.Background(), store.DeadLetterFilter{})
	if len(ds) != 1 || ds[0].Reason != "out_of_range" || !strings.Contains(ds[0].Detail, "1 of 3 records rejected") {
		t.Errorf("dead letters %+v; want one out_of_range naming 1 of 3 records", ds)
	}
	msgs, rds, _ := obs.snapshot()
	if msgs[OutcomeStored] != 1 || rds[OutcomeStored] != 2 || rds[OutcomeRejected] != 1 {
		t.Errorf("messages %v, readings %v; want 1 message stored, 2 readings stored, 1 rejected", msgs, rds)
	}
}

// TestReadmeStatesTheGuarantees: the README says packs are accepted per
// record and lists every reason code of ingest, the SenML decoder and the
// sensor map, and the 64 KiB payload limit (issue 10, defects 6 and the
// documentation of the reason codes).
func TestReadmeStatesTheGuarantees(t *testing.T) {
	b, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	readme := string(b)
	if strings.Contains(readme, "accepted or refused whole") || !strings.Contains(readme, "Packs are accepted per record") {
		t.Error("README.md does not say that packs are accepted per record")
	}
	codes := []string{"malformed_json", "bad_record", "bad_name", "bad_time", "unsupported_field", "unit_mismatch", "out_of_range"}
	for _, r := range OwnReasons() {
		codes = append(codes, string(r))
	}
	for _, c := range codes {
		if !strings.Contains(readme, "| `"+c+"` |") {
			t.Errorf("README.md's reason table lacks %s", c)
		}
	}
	for _, w := range []string{"64 KiB", "1 KiB", "10 minutes ahead of, or 30 days behind", "0.24 us"} {
		if !strings.Contains(readme, w) {
			t.Errorf("README.md does not state %q", w)
		}
	}
	api, err := os.ReadFile("../../docs/api.md")
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(api), "GET /api/dead-letters") {
		t.Error("docs/api.md does not describe GET /api/dead-letters")
	}
}

// TestDeadLetterCapCounted: above the store's cap the oldest dead letters
// are dropped, and ingest reports how many (shm_dead_letters_dropped_total).
func TestDeadLetterCapCounted(t *testing.T) {
	b := embeddedBroker(t)
	st, err := store.Open(filepath.Join(t.TempDir(), "m.db"), store.Options{MaxDeadLetters: 10})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	obs := newCountingObserver()
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "cap"}, Deps{Store: st, Registries: alderRegistry(), Observer: obs})
	waitSubscribed(t, in)
	pub := newPublisher(t, b.Addr(), "cap-pub")
	for i := range 30 {
		pub.publish("shm/alder-creek/g00", fmt.Appendf(nil, "not JSON %d", i))
	}
	deadline := time.Now().Add(30 * time.Second)
	for in.Stats().Messages < 30 && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	ds, _ := st.ListDeadLetters(context.Background(), store.DeadLetterFilter{})
	obs.mu.Lock()
	dropped := obs.deadDropped
	obs.mu.Unlock()
	if len(ds) != 10 || dropped != 20 || string(ds[0].Payload) != "not JSON 20" {
		t.Errorf("%d dead letters kept (oldest %q), %d reported dropped; want 10 kept from \"not JSON 20\", 20 dropped", len(ds), ds[0].Payload, dropped)
	}
}
