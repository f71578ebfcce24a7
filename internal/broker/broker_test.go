package broker

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
)

func connect(t *testing.T, addr, id, user, pass string) (paho.Client, error) {
	t.Helper()
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(id).
		SetUsername(user).SetPassword(pass).SetAutoReconnect(false).SetConnectTimeout(5 * time.Second).
		// While the broker holds back a publisher (its subscriber reads
		// slowly), the answer to a ping waits too: paho's default 10 s
		// ping timeout dropped the burst test's publisher on a loaded
		// machine (12,873 of 20,000 acknowledged, the rest failed).
		SetPingTimeout(5 * time.Minute)
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(time.Minute) {
		return nil, fmt.Errorf("connect timed out")
	}
	if err := tok.Error(); err != nil {
		return nil, err
	}
	t.Cleanup(func() { c.Disconnect(100) })
	return c, nil
}

func TestAuthentication(t *testing.T) {
	var logs bytes.Buffer
	b, err := Start(Config{
		Address: "127.0.0.1:0",
		Users:   map[string]string{"logger": "s3cret", "ops": "pa*"},
		Logger:  slog.New(slog.NewTextHandler(&logs, nil)),
	})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if strings.HasSuffix(b.Addr(), ":0") {
		t.Fatalf("Addr() = %s, want the bound port", b.Addr())
	}
	for _, c := range []struct {
		name, user, pass string
		ok               bool
	}{
		{"right password", "logger", "s3cret", true},
		{"wrong password", "logger", "s3cre", false},
		{"password prefix plus star", "logger", "s3*", false},
		{"star in stored password is literal", "ops", "password", false},
		{"star in stored password, exact", "ops", "pa*", true},
		{"unknown user", "nobody", "s3cret", false},
		{"user name wildcard", "log*", "s3cret", false},
		{"no credentials", "", "", false},
		{"user without password", "logger", "", false},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := connect(t, b.Addr(), "auth-"+strings.ReplaceAll(c.name, " ", "-"), c.user, c.pass)
			if c.ok && err != nil {
				t.Fatalf("refused: %v", err)
			}
			if !c.ok && err == nil {
				t.Fatal("accepted")
			}
		})
	}
}

func TestConfigErrors(t *testing.T) {
	for name, cfg := range map[string]Config{
		"no address":      {AllowAnonymous: true},
		"no users":        {Address: "127.0.0.1:0"},
		"empty password":  {Address: "127.0.0.1:0", Users: map[string]string{"a": ""}},
		"address in use?": {Address: "127.0.0.1:-1", AllowAnonymous: true},
	} {
		if b, err := Start(cfg); err == nil {
			b.Close()
			t.Errorf("%s: started", name)
		}
	}
}

// A burst of QoS 1 messages to a subscriber that acknowledges slowly must be
// held by the broker, not dropped: PROBES.md measured mochi's default limit
// losing 75k of 200k.
func TestBurstToSlowSubscriberNotDropped(t *testing.T) {
	b, err := Start(Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	const n = 20000
	var mu sync.Mutex
	seen := map[string]bool{}
	var held []paho.Message
	got := make(chan struct{})
	// The subscriber sends nothing while it holds the messages, so its
	// client pings the broker after the keep-alive, and the answer queues
	// behind the burst still in the socket. paho's default 10 s ping
	// timeout then drops the connection on a loaded machine (under -race
	// with other packages' tests: 18,280 of 20,000 received, then nothing;
	// likely also the 14,208 of the CI run). The timeout here is generous,
	// and a failure names a lost connection.
	lost := make(chan error, 1)
	o := paho.NewClientOptions().AddBroker("tcp://" + b.Addr()).SetClientID("slow-sub").
		SetCleanSession(false).SetAutoAckDisabled(true).SetAutoReconnect(false).
		SetPingTimeout(5 * time.Minute).
		SetConnectionLostHandler(func(_ paho.Client, err error) { lost <- err })
	o.SetDefaultPublishHandler(func(_ paho.Client, m paho.Message) {
		mu.Lock()
		defer mu.Unlock()
		seen[string(m.Payload())] = true
		held = append(held, m) // acknowledged only at the end
		if len(seen) == n {
			close(got)
		}
	})
	sub := paho.NewClient(o)
	if tok := sub.Connect(); !tok.WaitTimeout(time.Minute) || tok.Error() != nil {
		t.Fatalf("subscriber connect: %v", tok.Error())
	}
	defer sub.Disconnect(100)
	if tok := sub.Subscribe("shm/#", 1, nil); !tok.WaitTimeout(time.Minute) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	pub, err := connect(t, b.Addr(), "burst-pub", "", "")
	if err != nil {
		t.Fatal(err)
	}
	toks := make([]paho.Token, 0, n)
	for i := range n {
		toks = append(toks, pub.Publish("shm/alder-creek/g1", 1, false, fmt.Sprint(i)))
	}
	// Wait on progress, not on the clock: on a loaded machine the burst
	// may take minutes (14,208 of 20,000 had arrived after 60 s in one
	// loaded CI run, none dropped). Fail only when nothing new arrives for
	// a minute.
	count := func() int {
		mu.Lock()
		defer mu.Unlock()
		return len(seen)
	}
	if k, ok := waitProgress(got, count, time.Minute); !ok {
		select {
		case err := <-lost:
			t.Errorf("subscriber connection lost: %v", err)
		default:
		}
		// The publisher's failed tokens say why it stopped.
		for _, tok := range toks {
			if tok.WaitTimeout(0) && tok.Error() != nil {
				t.Errorf("publisher: %v", tok.Error())
				break
			}
		}
		acked, failed := 0, 0
		for _, tok := range toks {
			select {
			case <-tok.Done():
				if tok.Error() != nil {
					failed++
				} else {
					acked++
				}
			default:
			}
		}
		t.Fatalf("received %d of %d, none for a minute; broker dropped %d; publisher: %d acknowledged, %d failed, connected %v; subscriber connected %v",
			k, n, b.Dropped(), acked, failed, pub.IsConnectionOpen(), sub.IsConnectionOpen())
	}
	mu.Lock()
	for _, m := range held {
		m.Ack()
	}
	mu.Unlock()
	if d := b.Dropped(); d != 0 {
		t.Fatalf("broker dropped %d messages", d)
	}
	t.Logf("%d QoS 1 messages held unacknowledged by the subscriber, none dropped", n)
}

// recordingHandler keeps the records it is given.
type recordingHandler struct {
	mu   sync.Mutex
	recs []slog.Record
}

func (h *recordingHandler) Enabled(context.Context, slog.Level) bool { return true }
func (h *recordingHandler) Handle(_ context.Context, r slog.Record) error {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.recs = append(h.recs, r)
	return nil
}
func (h *recordingHandler) WithAttrs([]slog.Attr) slog.Handler { return h }
func (h *recordingHandler) WithGroup(string) slog.Handler      { return h }

// TestQuietHandlerEmptyMessages: the listener's empty-message warnings
// (mochi logs a connection's end as Warn("", "error", err)) never reach the
// log with an empty message; the broker's own closing of a connection at
// shutdown (net.ErrClosed) is dropped.
func TestQuietHandlerEmptyMessages(t *testing.T) {
	rec := &recordingHandler{}
	log := slog.New(&quietHandler{next: rec, every: time.Minute, last: &sync.Map{}})
	log.Warn("", "error", errors.New("read tcp 127.0.0.1:1883->127.0.0.1:5000: use of closed network connection"))
	log.Warn("", "error", errors.New("read tcp 127.0.0.1:1883->127.0.0.1:5001: connection reset by peer"))
	if len(rec.recs) != 1 {
		t.Fatalf("%d records passed on, want 1 (the reset, not the closed connection)", len(rec.recs))
	}
	if m := rec.recs[0].Message; m == "" || !strings.Contains(m, "client connection") {
		t.Errorf("message %q", m)
	}
}

// waitProgress waits until done is closed, as long as count keeps growing:
// it returns false (with the last count) only when count stays the same
// for stall.
func waitProgress(done <-chan struct{}, count func() int, stall time.Duration) (int, bool) {
	last, since := count(), time.Now()
	tick := time.NewTicker(100 * time.Millisecond)
	defer tick.Stop()
	for {
		select {
		case <-done:
			return count(), true
		case <-tick.C:
			if n := count(); n != last {
				last, since = n, time.Now()
			} else if time.Since(since) > stall {
				return n, false
			}
		}
	}
}
