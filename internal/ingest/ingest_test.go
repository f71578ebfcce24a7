package ingest

import (
	"bytes"
	"context"
	"fmt"
	"log/slog"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// countingObserver is a real Observer that keeps the counts.
type countingObserver struct {
	mu       sync.Mutex
	messages map[string]int
	readings map[string]int
	rejected map[string]int
	last     map[string]time.Time
	dropped  int
	// deadDropped counts dead letters dropped at the store's cap.
	deadDropped int
}

func newCountingObserver() *countingObserver {
	return &countingObserver{messages: map[string]int{}, readings: map[string]int{}, rejected: map[string]int{}, last: map[string]time.Time{}}
}

func (o *countingObserver) MessageHandled(s, outcome string) {
	o.mu.Lock()
	o.messages[outcome]++
	o.mu.Unlock()
}
func (o *countingObserver) ReadingsHandled(s, outcome string, n int) {
	o.mu.Lock()
	o.readings[outcome] += n
	o.mu.Unlock()
}
func (o *countingObserver) Rejected(s, reason string) {
	o.mu.Lock()
	o.rejected[reason]++
	o.mu.Unlock()
}
func (o *countingObserver) LastReading(s, ch string, t time.Time) {
	o.mu.Lock()
	if t.After(o.last[ch]) {
		o.last[ch] = t
	}
	o.mu.Unlock()
}
func (o *countingObserver) BrokerDropped(n int) {
	o.mu.Lock()
	o.dropped += n
	o.mu.Unlock()
}

func (o *countingObserver) DeadLettersDropped(n int) {
	o.mu.Lock()
	o.deadDropped += n
	o.mu.Unlock()
}
func (o *countingObserver) CommitFailed()              {}
func (o *countingObserver) BrokerConnection(c, r bool) {}

func (o *countingObserver) snapshot() (map[string]int, map[string]int, map[string]int) {
	o.mu.Lock()
	defer o.mu.Unlock()
	cp := func(m map[string]int) map[string]int {
		out := map[string]int{}
		for k, v := range m {
			out[k] = v
		}
		return out
	}
	return cp(o.messages), cp(o.readings), cp(o.rejected)
}

func brokers(t *testing.T) map[string]func(t *testing.T) string {
	return map[string]func(t *testing.T) string{
		"embedded":  func(t *testing.T) string { return embeddedBroker(t).Addr() },
		"mosquitto": func(t *testing.T) string { return systemMosquitto(t) },
	}
}

// TestEndToEnd: a publisher sends N sequenced QoS 1 readings (single
// readings and packs); every one is in SQLite exactly once.
func TestEndToEnd(t *testing.T) {
	for _, name := range []string{"embedded", "mosquitto"} {
		t.Run(name, func(t *testing.T) {
			addr := brokers(t)[name](t)
			st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
			id := fmt.Sprintf("trussmon-e2e-%d", time.Now().UnixNano())
			defer cleanSession(addr, id)
			obs := newCountingObserver()
			var cbMu sync.Mutex
			cbCount, cbCalls := 0, 0
			_, stop := startIngest(t, Config{Broker: "tcp://" + addr, ClientID: id, BatchSize: 500}, Deps{
				Store: st, Registries: alderRegistry(), Observer: obs,
				OnCommitted: func(s string, rs []store.Reading) {
					cbMu.Lock()
					cbCount += len(rs)
					cbCalls++
					cbMu.Unlock()
				},
			})
			time.Sleep(300 * time.Millisecond) // let it subscribe
			pub := newPublisher(t, addr, id+"-pub")
			const n, packs = 3000, 200
			// Closed loop: at most 500 messages published and not yet
			// stored. The machine's Mosquitto runs with its default limits
			// (20 in flight, 1000 queued per client), which drop QoS 1
			// messages once a busy subscriber falls 1000 behind; the
			// production config in deploy/mosquitto raises them.
			throttle := func(sent int) {
				deadline := time.Now().Add(60 * time.Second)
				for {
					cbMu.Lock()
					behind := sent - cbCalls
					cbMu.Unlock()
					if behind < 500 || time.Now().After(deadline) {
						return
					}
					time.Sleep(time.Millisecond)
				}
			}
			for i := range n {
				throttle(i)
				if err := pub.publish("shm/alder-creek/g00", singlePayload(i)); err != nil {
					t.Fatal(err)
				}
			}
			for i := range packs {
				throttle(n + i)
				// Packs at other times than the single readings.
				if err := pub.publish("shm/alder-creek", packPayload(n+i, 10)); err != nil {
					t.Fatal(err)
				}
			}
			// A redelivered copy (same readings again): stored once.
			if err := pub.publish("shm/alder-creek/g00", singlePayload(5)); err != nil {
				t.Fatal(err)
			}
			want := int64(n + packs*10)
			waitCount(t, st, "alder-creek", want, 60*time.Second)
			time.Sleep(200 * time.Millisecond)
			if err := stop(); err != nil {
				t.Fatal(err)
			}
			got, _ := st.CountReadings(context.Background(), "alder-creek", time.Time{}, time.Time{})
			if got != want {
				t.Fatalf("stored %d readings, want %d", got, want)
			}
			checkExactlyOnce(t, st, "alder-creek", "g00", n+packs)
			msgs, rds, _ := obs.snapshot()
			cbMu.Lock()
			defer cbMu.Unlock()
			if cbCount != int(want) || rds[OutcomeStored] != int(want) || rds[OutcomeDuplicate] < 1 || msgs[OutcomeDuplicate] < 1 {
				t.Fatalf("callback got %d readings; observer readings %v messages %v; want %d stored and the repeated message as a duplicate", cbCount, rds, msgs, want)
			}
			t.Logf("%s: sent %d messages (%d readings + 1 repeat), stored %d, duplicates seen %d, publish retries %d",
				name, n+packs+1, want, got, rds[OutcomeDuplicate], pub.errors.Load())
		})
	}
}

// TestBadInput: every kind of bad input is counted by reason, stored as a
// dead letter and acknowledged, and readings sent after it are stored.
func TestBadInput(t *testing.T) {
	b := embeddedBroker(t)
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	obs := newCountingObserver()
	var logs safeBuffer
	in, stop := startIngest(t, Config{Broker: "tcp://" + b.Addr(), ClientID: "bad-input", MaxPayload: 4096, MaxAbsValue: 1e9, SubscribeAll: true}, Deps{
		Store: st, Registries: alderRegistry(), Observer: obs,
		Logger: slog.New(slog.NewTextHandler(&logs, nil)),
	})
	time.Sleep(300 * time.Millisecond)
	pub := newPublisher(t, b.Addr(), "bad-input-pub")
	bt := senmlTime(t0)
	cases := []struct {
		name, topic, payload string
		reason               Reason
	}{
		{"malformed JSON", "shm/alder-creek/g00", `[{"v":1.0,`, "malformed_json"},
		{"not an array", "shm/alder-creek/g00", `{"v":1}`, "malformed_json"},
		{"value is a string", "shm/alder-creek/g00", `[{"bt":` + bt + `,"v":"12"}]`, "bad_record"},
		{"NaN spelled out", "shm/alder-creek/g00", `[{"bt":` + bt + `,"v":NaN}]`, "malformed_json"},
		{"overflow to Inf", "shm/alder-creek/g00", `[{"bt":` + bt + `,"v":1e999}]`, "not_finite"},
		{"absurd magnitude", "shm/alder-creek/g00", `[{"bt":` + bt + `,"v":3e11}]`, ReasonAbsurdMagnitude},
		{"out of range", "shm/alder-creek/t1", `[{"bt":` + bt + `,"u":"Cel","v":400}]`, "out_of_range"},
		{"unit mismatch", "shm/alder-creek/t1", `[{"bt":` + bt + `,"u":"K","v":290}]`, "unit_mismatch"},
		{"unknown channel", "shm/alder-creek/g99", `[{"bt":` + bt + `,"v":1}]`, "unknown_channel"},
		{"unknown structure", "shm/other-bridge/g00", `[{"bt":` + bt + `,"v":1}]`, ReasonUnknownStructure},
		{"empty structure level", "shm//g00", `[{"bt":` + bt + `,"v":1}]`, ReasonBadTopic},
		{"name differs from topic", "shm/alder-creek/g00", `[{"bt":` + bt + `,"n":"g01","v":1}]`, ReasonNameMismatch},
		{"pack record without name", "shm/alder-creek", `[{"bt":` + bt + `,"v":1}]`, ReasonMissingName},
		{"relative time", "shm/alder-creek/g00", `[{"t":-5,"v":1}]`, ReasonRelativeTime},
		{"empty pack", "shm/alder-creek/g00", `[]`, ReasonEmptyPack},
		{"oversized", "shm/alder-creek/g00", `[{"bt":` + bt + `,"v":1,"x":"` + strings.Repeat("a", 5000) + `"}]`, ReasonOversized},
		{"must-understand field", "shm/alder-creek/g00", `[{"bt":` + bt + `,"v":1,"foo_":2}]`, "unsupported_field"},
	}
	for _, c := range cases {
		if err := pub.publish(c.topic, []byte(c.payload)); err != nil {
			t.Fatal(err)
		}
	}
	// Each bad message repeated: counted again, nothing stalls.
	for _, c := range cases {
		if err := pub.publish(c.topic, []byte(c.payload)); err != nil {
			t.Fatal(err)
		}
	}
	// A mixed pack: two good readings and one bad one.
	mixed := `[{"bt":` + senmlTime(readingTime(100)) + `,"n":"g01","u":"/","v":1},{"n":"g02","v":2},{"n":"g03","v":5e10}]`
	pub.publish("shm/alder-creek", []byte(mixed))
	// Duplicate and out-of-order readings are not errors: stored once each.
	for _, i := range []int{3, 1, 2, 2, 0, 1} {
		pub.publish("shm/alder-creek/g00", singlePayload(i))
	}
	// Readings after all of that are stored.
	const after = 50
	for i := range after {
		pub.publish("shm/alder-creek/g00", singlePayload(1000+i))
	}
	want := int64(4 + 2 + after)
	got := waitCount(t, st, "alder-creek", want, 30*time.Second)
	time.Sleep(300 * time.Millisecond)
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	if got != want {
		t.Fatalf("stored %d readings, want %d", got, want)
	}
	ctx := context.Background()
	dl, err := st.CountDeadLetters(ctx)
	if err != nil {
		t.Fatal(err)
	}
	_, rds, rej := obs.snapshot()
	stats := in.Stats()
	for _, c := range cases {
		want := 2
		if c.reason == ReasonAbsurdMagnitude {
			want = 3 // and the mixed pack's third record
		}
		// Cases that share a reason add up.
		for _, o := range cases {
			if o.reason == c.reason && o.name != c.name {
				want += 2
			}
		}
		if r := string(c.reason); dl[r] != int64(want) || rej[r] != want || stats.Rejected[r] != int64(want) {
			t.Errorf("%s: reason %q: %d dead letters, %d observed, %d in stats; want %d", c.name, c.reason, dl[string(c.reason)], rej[string(c.reason)], stats.Rejected[string(c.reason)], want)
		}
	}
	if rds[OutcomeDuplicate] != 2 || rds[OutcomeRejected] < 3 {
		t.Errorf("readings by outcome %v; want 2 duplicates", rds)
	}
	// The dead letter keeps an excerpt of the payload and its size.
	letters, _ := st.DeadLetters(ctx, time.Time{}, time.Time{}, 0)
	for _, d := range letters {
		if d.Reason == string(ReasonOversized) && (len(d.Payload) != store.ExcerptBytes || d.Size <= 4096 || d.Repeats != 2) {
			t.Errorf("oversized dead letter keeps %d bytes of %d, %d repeats; want %d bytes of more than 4096, 2 repeats", len(d.Payload), d.Size, d.Repeats, store.ExcerptBytes)
		}
		if d.Reason == "malformed_json" && d.Topic != "shm/alder-creek/g00" {
			t.Errorf("dead letter topic %q", d.Topic)
		}
	}
	// Logged once per reason (the limit is one a minute), not per message.
	for _, c := range cases {
		if n := strings.Count(logs.String(), "reason="+string(c.reason)+" "); n != 1 {
			t.Errorf("reason %s logged %d times, want 1", c.reason, n)
		}
	}
	t.Logf("bad input: %d kinds sent twice, dead letters by reason %v, readings by outcome %v, stored %d", len(cases), dl, rds, got)
}

type safeBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *safeBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *safeBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func TestConfigErrors(t *testing.T) {
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	for name, c := range map[string]struct {
		cfg  Config
		deps Deps
	}{
		"no broker":        {Config{ClientID: "x"}, Deps{Store: st, Registries: alderRegistry()}},
		"no client id":     {Config{Broker: "tcp://127.0.0.1:1"}, Deps{Store: st, Registries: alderRegistry()}},
		"no store":         {Config{Broker: "tcp://127.0.0.1:1", ClientID: "x"}, Deps{Registries: alderRegistry()}},
		"no registries":    {Config{Broker: "tcp://127.0.0.1:1", ClientID: "x"}, Deps{Store: st}},
		"missing CA file":  {Config{Broker: "ssl://127.0.0.1:1", ClientID: "x", CAFile: "/nonexistent/ca.pem"}, Deps{Store: st, Registries: alderRegistry()}},
		"cert without key": {Config{Broker: "ssl://127.0.0.1:1", ClientID: "x", CertFile: "c.pem"}, Deps{Store: st, Registries: alderRegistry()}},
	} {
		if _, err := New(c.cfg, c.deps); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

func FuzzDecode(f *testing.F) {
	f.Add("shm/alder-creek/g00", []byte(`[{"bt":1772366400.001,"v":1}]`))
	f.Add("shm/alder-creek", []byte(`[{"bt":1772366400,"n":"g01","u":"/","v":2},{"n":"t1","u":"Cel","v":20}]`))
	f.Add("shm//", []byte(`[`))
	st, err := store.Open(filepath.Join(f.TempDir(), "f.db"), store.Options{})
	if err != nil {
		f.Fatal(err)
	}
	defer st.Close()
	in, err := New(Config{Broker: "tcp://127.0.0.1:1", ClientID: "fuzz", MaxPayload: 1 << 12}, Deps{Store: st, Registries: alderRegistry()})
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, topic string, payload []byte) {
		m := in.decode(received{msg: fakeMessage{topic, payload}, at: t0})
		if len(m.readings) == 0 && len(m.dead) == 0 {
			t.Fatalf("message neither stored nor rejected: %q %q", topic, payload)
		}
		for _, r := range m.readings {
			if _, err := st.InsertReadings(context.Background(), "alder-creek", []store.Reading{r}); err != nil {
				t.Fatalf("accepted reading the store refuses: %v", err)
			}
		}
	})
}

// fakeMessage carries a topic and payload into decode for the fuzz test,
// which exercises the decoder only (no broker, nothing to acknowledge).
type fakeMessage struct {
	topic   string
	payload []byte
}

func (m fakeMessage) Duplicate() bool   { return false }
func (m fakeMessage) Qos() byte         { return 1 }
func (m fakeMessage) Retained() bool    { return false }
func (m fakeMessage) Topic() string     { return m.topic }
func (m fakeMessage) MessageID() uint16 { return 0 }
func (m fakeMessage) Payload() []byte   { return m.payload }
func (m fakeMessage) Ack()              {}

// TestSubscriptionFilters: by default only the registries' structures'
// topics are subscribed (and the wildcard ones of an earlier session
// removed); SubscribeAll takes every structure's.
func TestSubscriptionFilters(t *testing.T) {
	st := openStore(t, filepath.Join(t.TempDir(), "m.db"))
	for _, all := range []bool{false, true} {
		in, err := New(Config{Broker: "tcp://127.0.0.1:1", ClientID: "filters", SubscribeAll: all}, Deps{Store: st, Registries: alderRegistry()})
		if err != nil {
			t.Fatal(err)
		}
		sub, unsub := in.filters()
		want, wantUnsub := "shm/alder-creek shm/alder-creek/+", "shm/+ shm/+/+"
		if all {
			want, wantUnsub = "shm/+ shm/+/+", ""
		}
		if got := filterList(sub); got != want {
			t.Errorf("SubscribeAll %v: subscribes %q, want %q", all, got, want)
		}
		if got := strings.Join(unsub, " "); got != wantUnsub {
			t.Errorf("SubscribeAll %v: unsubscribes %q, want %q", all, got, wantUnsub)
		}
	}
}
