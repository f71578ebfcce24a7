package ingest

import (
	"bufio"
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"math"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/store"
)

// testRegistry is a small real registry: a fixed channel list with units
// and a plausible range per channel.
type testRegistry map[string]chanSpec

type chanSpec struct {
	unit     string
	min, max float64
}

type regError struct{ reason, msg string }

func (e *regError) Error() string  { return e.msg }
func (e *regError) Reason() string { return e.reason }

func (r testRegistry) Validate(channel, unit string, v float64) error {
	c, ok := r[channel]
	switch {
	case !ok:
		return &regError{"unknown_channel", fmt.Sprintf("channel %q is not in the sensor map", channel)}
	case unit != "" && unit != c.unit:
		return &regError{"unit_mismatch", fmt.Sprintf("channel %q: unit %q, sensor map says %q", channel, unit, c.unit)}
	case math.IsNaN(v) || math.IsInf(v, 0):
		return &regError{"not_finite", fmt.Sprintf("channel %q: value %v", channel, v)}
	case v < c.min || v > c.max:
		return &regError{"out_of_range", fmt.Sprintf("channel %q: %g outside [%g, %g]", channel, v, c.min, c.max)}
	}
	return nil
}

// channels g00..g49 of the invented "Alder Creek footbridge".
func alderRegistry() map[string]Registry {
	r := testRegistry{}
	for i := range 50 {
		r[fmt.Sprintf("g%02d", i)] = chanSpec{unit: "/", min: -1e9, max: 1e9}
	}
	r["t1"] = chanSpec{unit: "Cel", min: -60, max: 90}
	return map[string]Registry{"alder-creek": r}
}

const requireEnv = "TRUSSMON_REQUIRE_TOOLS"

// skipOrFail skips a test that needs a missing outside tool, or fails it
// when TRUSSMON_REQUIRE_TOOLS=1.
func skipOrFail(t testing.TB, format string, args ...any) {
	t.Helper()
	msg := fmt.Sprintf(format, args...)
	if os.Getenv(requireEnv) == "1" {
		t.Fatalf("%s (%s=1 makes this a failure)", msg, requireEnv)
	}
	t.Skip(msg)
}

// systemMosquitto returns the machine's Mosquitto address if it answers an
// MQTT connect.
func systemMosquitto(t testing.TB) string {
	t.Helper()
	const addr = "127.0.0.1:1883"
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(fmt.Sprintf("probe-%d", time.Now().UnixNano())).
		SetConnectTimeout(2 * time.Second).SetAutoReconnect(false)
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(3*time.Second) || tok.Error() != nil {
		skipOrFail(t, "Mosquitto at %s does not answer (%v); start it (apt-get install mosquitto)", addr, tok.Error())
	}
	c.Disconnect(50)
	return addr
}

func embeddedBroker(t testing.TB) *broker.Broker {
	t.Helper()
	b, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	return b
}

func freePort(t testing.TB) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// mosquittoProc is a Mosquitto process of the test's own.
type mosquittoProc struct {
	addr string
	conf string
	cmd  *exec.Cmd
	log  string
}

// startOwnMosquitto starts mosquitto on a spare loopback port with
// persistence in dir and the limits of deploy/mosquitto/mosquitto.conf.
func startOwnMosquitto(t testing.TB, dir string, port int) *mosquittoProc {
	t.Helper()
	bin, err := exec.LookPath("mosquitto")
	if err != nil {
		skipOrFail(t, "mosquitto binary not found (apt-get install mosquitto)")
	}
	conf := filepath.Join(dir, "mosquitto.conf")
	log := filepath.Join(dir, "mosquitto.log")
	// Run as root, mosquitto switches to the "mosquitto" user, which cannot
	// write to the test's private temp dir (no persistence, no log).
	user := ""
	if os.Geteuid() == 0 {
		user = "user root\n"
	}
	text := user + fmt.Sprintf(`per_listener_settings false
listener %d 127.0.0.1
allow_anonymous true
persistence true
persistence_location %s/
autosave_interval 1
max_inflight_messages 1000
max_queued_messages 100000
max_queued_bytes 0
log_dest file %s
log_type error
log_type warning
log_type notice
`, port, dir, log)
	if err := os.WriteFile(conf, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	p := &mosquittoProc{addr: fmt.Sprintf("127.0.0.1:%d", port), conf: conf, log: log}
	p.start(t, bin)
	t.Cleanup(func() { p.stop() })
	return p
}

func (p *mosquittoProc) start(t testing.TB, bin string) {
	t.Helper()
	p.cmd = exec.Command(bin, "-c", p.conf)
	if err := p.cmd.Start(); err != nil {
		t.Fatalf("starting mosquitto: %v", err)
	}
	deadline := time.Now().Add(10 * time.Second)
	for time.Now().Before(deadline) {
		if c, err := net.DialTimeout("tcp", p.addr, 200*time.Millisecond); err == nil {
			c.Close()
			return
		}
		time.Sleep(50 * time.Millisecond)
	}
	b, _ := os.ReadFile(p.log)
	t.Fatalf("mosquitto did not listen on %s; log:\n%s", p.addr, b)
}

// stop ends the process with SIGTERM (Mosquitto saves its persistence
// file on a clean stop) and waits.
func (p *mosquittoProc) stop() {
	if p.cmd == nil || p.cmd.Process == nil {
		return
	}
	p.cmd.Process.Signal(os.Interrupt)
	done := make(chan struct{})
	go func() { p.cmd.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(10 * time.Second):
		p.cmd.Process.Kill()
		<-done
	}
	p.cmd = nil
}

func (p *mosquittoProc) restart(t testing.TB) {
	t.Helper()
	p.stop()
	bin, _ := exec.LookPath("mosquitto")
	p.start(t, bin)
}

// dropLines returns the log lines in which Mosquitto reports dropped messages.
func (p *mosquittoProc) dropLines() []string {
	f, err := os.Open(p.log)
	if err != nil {
		return nil
	}
	defer f.Close()
	var out []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if strings.Contains(strings.ToLower(sc.Text()), "drop") {
			out = append(out, sc.Text())
		}
	}
	return out
}

// t0 is two to three hours before the test's start: readings must lie in
// the window around the receiver's clock (DefaultMaxBehind).
var t0 = time.Now().UTC().Truncate(time.Hour).Add(-2 * time.Hour)

// readingTime is the logger time of sequence number i (1 ms apart).
func readingTime(i int) time.Time { return t0.Add(time.Duration(i) * time.Millisecond) }

// senmlTime formats t as SenML seconds with millisecond digits (exact).
func senmlTime(t time.Time) string {
	return fmt.Sprintf("%d.%03d", t.Unix(), t.Nanosecond()/1e6)
}

// singlePayload is one reading on shm/<structure>/<channel>.
func singlePayload(i int) []byte {
	return fmt.Appendf(nil, `[{"bt":%s,"u":"/","v":%d}]`, senmlTime(readingTime(i)), i)
}

// packPayload is a pack of n readings (channels g00.., one time) on
// shm/<structure>; sequence i.
func packPayload(i, n int) []byte {
	b := fmt.Appendf(nil, `[{"bn":"","bt":%s,"bu":"/","n":"g00","v":%d}`, senmlTime(readingTime(i)), i)
	for c := 1; c < n; c++ {
		b = fmt.Appendf(b, `,{"n":"g%02d","v":%d}`, c, i)
	}
	return append(b, ']')
}

// publisher publishes QoS 1 messages with a persistent session.
type publisher struct {
	c      paho.Client
	errors atomic.Int64
}

func newPublisher(t testing.TB, addr, id string) *publisher {
	t.Helper()
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(id).
		SetCleanSession(false).SetAutoReconnect(true).SetConnectRetry(true).
		SetConnectRetryInterval(100 * time.Millisecond).SetMaxReconnectInterval(time.Second).
		SetWriteTimeout(5 * time.Second)
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("publisher connect to %s: %v", addr, tok.Error())
	}
	t.Cleanup(func() { c.Disconnect(200) })
	return &publisher{c: c}
}

// newTLSPublisher is newPublisher over TLS with a user name and password.
func newTLSPublisher(t testing.TB, url, id, user, pass string, tc *tls.Config) *publisher {
	t.Helper()
	o := paho.NewClientOptions().AddBroker(url).SetClientID(id).SetUsername(user).SetPassword(pass).
		SetTLSConfig(tc).SetCleanSession(false).SetAutoReconnect(true).SetWriteTimeout(5 * time.Second)
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("publisher connect to %s: %v", url, tok.Error())
	}
	t.Cleanup(func() { c.Disconnect(200) })
	return &publisher{c: c}
}

// publish sends one message and waits for the broker's PUBACK, retrying
// (a retry may duplicate the message; the store keeps one copy).
func (p *publisher) publish(topic string, payload []byte) error {
	for attempt := 0; attempt < 200; attempt++ {
		tok := p.c.Publish(topic, 1, false, payload)
		if tok.WaitTimeout(5*time.Second) && tok.Error() == nil {
			return nil
		}
		p.errors.Add(1)
		time.Sleep(50 * time.Millisecond)
	}
	return errors.New("publish failed 200 times")
}

// startIngest runs an Ingester in the background; stop cancels it and
// waits for Run to return.
func startIngest(t testing.TB, cfg Config, deps Deps) (in *Ingester, stop func() error) {
	t.Helper()
	in, err := New(cfg, deps)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- in.Run(ctx) }()
	var stopped bool
	var runErr error
	stop = func() error {
		if !stopped {
			stopped = true
			cancel()
			select {
			case runErr = <-done:
			case <-time.After(30 * time.Second):
				runErr = errors.New("Run did not return within 30 s of cancel")
			}
		}
		return runErr
	}
	t.Cleanup(func() { stop() })
	return in, stop
}

// waitCount waits until structure has want readings stored, or until the
// count made no progress for stall; it returns the last count.
func waitCount(t testing.TB, st *store.Store, structure string, want int64, stall time.Duration) int64 {
	t.Helper()
	// Wait on progress, not on the clock: while the count grows the wait
	// goes on (a loaded machine is slow, not stuck); it gives up once the
	// count stayed the same for stall.
	var n int64
	last, since := int64(-1), time.Now()
	for {
		var err error
		n, err = st.CountReadings(context.Background(), structure, time.Time{}, time.Time{})
		if err != nil {
			t.Fatal(err)
		}
		if n >= want {
			return n
		}
		if n != last {
			last, since = n, time.Now()
		} else if time.Since(since) > stall {
			return n
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// checkExactlyOnce verifies that readings 0..n-1 of channel are stored
// once each with value = sequence number.
func checkExactlyOnce(t testing.TB, st *store.Store, structure, channel string, n int) {
	t.Helper()
	seen := make([]int, n)
	extra := 0
	err := st.ReadReadings(context.Background(), structure, time.Time{}, time.Time{}, func(r store.Reading) error {
		if r.Channel != channel {
			return nil
		}
		i := int(r.Value)
		if i < 0 || i >= n || !r.Time.Equal(readingTime(i)) {
			extra++
			return nil
		}
		seen[i]++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	missing, twice := 0, 0
	var first []int
	for i, c := range seen {
		switch {
		case c == 0:
			missing++
			if len(first) < 20 {
				first = append(first, i)
			}
		case c > 1:
			twice++
		}
	}
	if missing > 0 || twice > 0 || extra > 0 {
		t.Fatalf("channel %s: %d of %d readings missing (first: %v), %d stored more than once, %d unexpected", channel, missing, n, first, twice, extra)
	}
}

func openStore(t testing.TB, path string) *store.Store {
	t.Helper()
	st, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	return st
}

// cleanSession removes a persistent session from a shared broker.
func cleanSession(addr, id string) {
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(id).SetCleanSession(true).SetAutoReconnect(false)
	c := paho.NewClient(o)
	if tok := c.Connect(); tok.WaitTimeout(3*time.Second) && tok.Error() == nil {
		c.Disconnect(50)
	}
}
