package publish

import (
	"context"
	"errors"
	"fmt"
	"iter"
	"math"
	"net"
	"os"
	"sync"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/senml"
	"trussmonitor/internal/simulate"
)

// steps makes n synthetic steps of the given channels, one bad message in
// every tenth step.
func steps(n int, channels []string) iter.Seq2[simulate.Step, error] {
	return func(yield func(simulate.Step, error) bool) {
		t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
		for k := 0; k < n; k++ {
			st := simulate.Step{Time: t0.Add(time.Duration(k) * time.Second)}
			for i, c := range channels {
				st.Readings = append(st.Readings, simulate.LoggerValue{Channel: c, Unit: "/", Value: float64(k*100 + i)})
			}
			if k%10 == 9 {
				st.Bad = append(st.Bad, simulate.LoggerValue{Channel: channels[0], Unit: "/", Value: math.NaN(), Defect: simulate.DefectNaN})
			}
			if !yield(st, nil) {
				return
			}
		}
	}
}

// collector subscribes to shm/<structure>/# and decodes what arrives.
type collector struct {
	mu       sync.Mutex
	readings map[string]senml.Record // channel@unixnano -> record
	rejected int
	messages int
}

func (c *collector) handle(_ mqtt.Client, m mqtt.Message) {
	recs, err := senml.Decode(m.Payload(), time.Now())
	c.mu.Lock()
	defer c.mu.Unlock()
	c.messages++
	if err != nil {
		c.rejected++
		return
	}
	for _, r := range recs {
		c.readings[fmt.Sprintf("%s@%d", r.Name, r.Time.UnixNano())] = r
	}
}

func (c *collector) count() (good, rejected int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.readings), c.rejected
}

func subscribe(t *testing.T, url, structure string) *collector {
	t.Helper()
	c := &collector{readings: map[string]senml.Record{}}
	co := mqtt.NewClientOptions().AddBroker(url).SetClientID("sub-" + t.Name()).SetCleanSession(true)
	cl := mqtt.NewClient(co)
	if tok := cl.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("subscriber connect to %s: %v", url, tok.Error())
	}
	t.Cleanup(func() { cl.Disconnect(100) })
	if tok := cl.Subscribe(Topic(structure)+"/#", 1, c.handle); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	// "shm/x/#" also matches "shm/x" itself (MQTT 3.1.1 section 4.7.1.2).
	return c
}

func waitFor(t *testing.T, c *collector, good, bad int) {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for time.Now().Before(deadline) {
		g, b := c.count()
		if g >= good && b >= bad {
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	g, b := c.count()
	t.Fatalf("subscriber got %d good readings and %d rejected messages, want %d and %d", g, b, good, bad)
}

func embedded(t *testing.T) string {
	t.Helper()
	b, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		t.Fatalf("embedded broker: %v", err)
	}
	t.Cleanup(func() { b.Close() })
	return "tcp://" + b.Addr()
}

func TestPublishEmbedded(t *testing.T) {
	for _, perChannel := range []bool{false, true} {
		t.Run(fmt.Sprintf("perChannel=%v", perChannel), func(t *testing.T) {
			url := embedded(t)
			chans := []string{"B2_a", "B2_b", "pad_1"}
			sub := subscribe(t, url, "alder-creek")
			const n = 500
			stats, err := Run(context.Background(), steps(n, chans), Options{Broker: url, Structure: "alder-creek", PerChannel: perChannel, ClientID: "pub-" + t.Name()})
			if err != nil {
				t.Fatal(err)
			}
			wantMsgs := n + n/10
			if perChannel {
				wantMsgs = n*len(chans) + n/10
			}
			if stats.Steps != n || stats.Readings != n*len(chans) || stats.Bad != n/10 || stats.Messages != wantMsgs {
				t.Fatalf("stats %+v, want %d steps, %d readings, %d bad, %d messages", stats, n, n*len(chans), n/10, wantMsgs)
			}
			waitFor(t, sub, n*len(chans), n/10)
			// Values and times arrive exactly.
			r := sub.readings[fmt.Sprintf("B2_b@%d", time.Date(2026, 6, 1, 0, 0, 7, 0, time.UTC).UnixNano())]
			if r.Value != 701 || r.Unit != "/" {
				t.Fatalf("B2_b at step 7: got %+v, want value 701 unit /", r)
			}
		})
	}
}

// TestPublishMosquitto runs the same exchange through the machine's
// Mosquitto at 127.0.0.1:1883.
func TestPublishMosquitto(t *testing.T) {
	conn, err := net.DialTimeout("tcp", "127.0.0.1:1883", time.Second)
	if err != nil {
		if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
			t.Fatalf("Mosquitto is required (TRUSSMON_REQUIRE_TOOLS=1) but nothing listens on 127.0.0.1:1883: %v", err)
		}
		t.Skipf("skipping: needs Mosquitto listening on 127.0.0.1:1883 (%v)", err)
	}
	conn.Close()
	url := "tcp://127.0.0.1:1883"
	structure := fmt.Sprintf("simtest-%d", time.Now().UnixNano())
	sub := subscribe(t, url, structure)
	const n = 300
	if _, err := Run(context.Background(), steps(n, []string{"a", "b"}), Options{Broker: url, Structure: structure, ClientID: "pub-" + structure}); err != nil {
		t.Fatal(err)
	}
	waitFor(t, sub, 2*n, n/10)
}

// TestPacing checks that a positive speed spreads the steps over at least
// the simulated span divided by the speed, and that cancelling stops early.
func TestPacing(t *testing.T) {
	url := embedded(t)
	start := time.Now()
	// 21 steps one simulated second apart at speed 20: at least 1 s.
	if _, err := Run(context.Background(), steps(21, []string{"a"}), Options{Broker: url, Structure: "pace", Speed: 20}); err != nil {
		t.Fatal(err)
	}
	if el := time.Since(start); el < time.Second {
		t.Fatalf("21 steps at speed 20 took %s, want at least 1 s", el)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 300*time.Millisecond)
	defer cancel()
	stats, err := Run(ctx, steps(1000, []string{"a"}), Options{Broker: url, Structure: "pace", Speed: 1})
	if !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("cancelled run returned %v, want the context's error", err)
	}
	if stats.Steps < 1 || stats.Steps > 5 {
		t.Fatalf("cancelled after 0.3 s at speed 1 but sent %d steps", stats.Steps)
	}
}

func TestConnectError(t *testing.T) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	_, err = Run(context.Background(), steps(1, []string{"a"}), Options{Broker: "tcp://" + addr, Structure: "x", Timeout: 2 * time.Second})
	if err == nil {
		t.Fatal("publishing to a closed port succeeded")
	}
}

func TestAppendPackDecodes(t *testing.T) {
	tm := time.Date(2026, 6, 1, 14, 0, 0, 123456789, time.UTC)
	rs := []simulate.LoggerValue{{Channel: "B2_a", Unit: "/", Value: -1.25e-5}, {Channel: "pad_1", Unit: "N", Value: 735.5}}
	p := AppendPack(nil, tm, rs)
	want := `[{"bn":"","bt":1780322400.123456789,"n":"B2_a","u":"/","v":-1.25e-05},{"n":"pad_1","u":"N","v":735.5}]`
	if string(p) != want {
		t.Fatalf("pack\n got %s\nwant %s", p, want)
	}
	recs, err := senml.Decode(p, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 2 || recs[1].Name != "pad_1" || recs[1].Value != 735.5 || recs[0].Unit != "/" {
		t.Fatalf("decoded %+v", recs)
	}
	// bt as a float64 of ~1.8e9 s resolves to about 0.2 microseconds.
	if d := recs[0].Time.Sub(tm); d > time.Microsecond || d < -time.Microsecond {
		t.Fatalf("time %s, want %s", recs[0].Time, tm)
	}
	if _, err := senml.Decode(Malformed(tm, rs[0]), time.Now()); err == nil {
		t.Fatal("the malformed payload decoded")
	}
	if _, err := senml.Decode(AppendPack(nil, tm, []simulate.LoggerValue{{Channel: "x", Value: math.NaN()}}), time.Now()); err == nil {
		t.Fatal("a NaN payload decoded")
	}
}
