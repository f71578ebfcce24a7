package service

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"trussmonitor/internal/config"
)

// syncBuffer is a log destination safe for concurrent writers.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// startFootbridge starts a service of the footbridge with the embedded
// broker, both on loopback ports chosen by the system, and stops it at the
// end of the test. edit may change the configuration.
func startFootbridge(t *testing.T, edit func(*config.Config), opt Options) (*Service, *syncBuffer) {
	svc, logs, _ := startStoppable(t, edit, opt)
	return svc, logs
}

// startStoppable is startFootbridge that also returns a function stopping
// the service (waiting for its shutdown); calling it again does nothing.
func startStoppable(t *testing.T, edit func(*config.Config), opt Options) (*Service, *syncBuffer, func()) {
	t.Helper()
	cfg := config.Defaults()
	cfg.File = "(test)"
	cfg.Database = t.TempDir() + "/monitor.db"
	cfg.HTTP.Listen = "127.0.0.1:0"
	cfg.Broker.Embedded = true
	cfg.Broker.Listen = "127.0.0.1:0"
	cfg.Broker.ClientID = "service-test"
	cfg.Structures = []config.Structure{{Structure: "../../testdata/footbridge/structure.yaml", Sensors: "../../testdata/footbridge/sensors.yaml"}}
	if edit != nil {
		edit(&cfg)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	logs := &syncBuffer{}
	opt.Logger = slog.New(slog.NewTextHandler(logs, nil))
	svc, err := New(&cfg, opt)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	if err := svc.Start(ctx); err != nil {
		cancel()
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- svc.Run(ctx) }()
	var once sync.Once
	stop := func() {
		once.Do(func() {
			cancel()
			if err := <-done; err != nil {
				t.Errorf("shutdown: %v", err)
			}
		})
	}
	t.Cleanup(stop)
	return svc, logs, stop
}

// TestHTTPIdleConnectionClosed: a keep-alive connection that sends nothing
// after its request is closed by the server after the idle timeout. Before
// the fix the server had no idle timeout and such a connection stayed open
// (over 200 s in the fault trials; here the read below never returned).
func TestHTTPIdleConnectionClosed(t *testing.T) {
	svc, logs := startFootbridge(t, nil, Options{HTTPIdleTimeout: 300 * time.Millisecond})
	c, err := net.Dial("tcp", svc.HTTPAddr())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	if _, err := io.WriteString(c, "GET /healthz HTTP/1.1\r\nHost: monitor\r\n\r\n"); err != nil {
		t.Fatal(err)
	}
	br := bufio.NewReader(c)
	resp, err := http.ReadResponse(br, nil)
	if err != nil {
		t.Fatal(err)
	}
	io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
	if resp.Close {
		t.Fatal("the server closed the connection after the request; want keep-alive")
	}
	// Wait for the server to close the idle connection. The deadline only
	// ends a test that would otherwise hang.
	start := time.Now()
	c.SetReadDeadline(time.Now().Add(2 * time.Minute))
	_, err = br.ReadByte()
	if err != io.EOF {
		t.Fatalf("idle keep-alive connection: read %v after %v, want EOF (closed by the server)", err, time.Since(start))
	}
	t.Logf("idle connection closed after %v (idle timeout 300ms)", time.Since(start).Round(time.Millisecond))
	if strings.Contains(logs.String(), "non-loopback") {
		t.Errorf("warning about a non-loopback address while listening on %s:\n%s", svc.HTTPAddr(), logs)
	}
}

// TestHTTPErrorsAndHeaders: the service's whole HTTP server (metrics,
// health, API, page) answers 404 and 405 in JSON and forbids framing.
func TestHTTPErrorsAndHeaders(t *testing.T) {
	svc, _ := startFootbridge(t, nil, Options{})
	base := "http://" + svc.HTTPAddr()
	for _, c := range []struct {
		method, path string
		status       int
	}{
		{"GET", "/metrics", 200},
		{"GET", "/healthz", 200},
		{"POST", "/metrics", 405},
		{"POST", "/readyz", 405},
		{"GET", "/no-such-file.js", 404},
		{"GET", "/api/structures/" + strings.Repeat("y", 50_000) + "/state", 404},
	} {
		req, _ := http.NewRequest(c.method, base+c.path, nil)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		what := c.method + " " + c.path[:min(len(c.path), 40)]
		if resp.StatusCode != c.status {
			t.Errorf("%s: status %d, want %d", what, resp.StatusCode, c.status)
		}
		if resp.Header.Get("X-Frame-Options") != "DENY" || !strings.Contains(resp.Header.Get("Content-Security-Policy"), "frame-ancestors 'none'") {
			t.Errorf("%s: framing not forbidden: %v", what, resp.Header)
		}
		if c.status == 200 {
			continue
		}
		var e struct{ Error string }
		if err := json.Unmarshal(b, &e); err != nil || e.Error == "" {
			t.Errorf("%s: not a JSON error: %.200s", what, b)
		}
		if bytes.Contains(b, []byte("yyyyyyyy")) {
			t.Errorf("%s: the requested name is echoed back", what)
		}
	}
}

// TestExposedAddress: which listening addresses draw the warning.
func TestExposedAddress(t *testing.T) {
	for _, c := range []struct {
		ip   string
		want bool
	}{
		{"127.0.0.1", false}, {"127.0.0.2", false}, {"::1", false},
		{"0.0.0.0", true}, {"::", true}, {"192.168.1.20", true}, {"10.0.0.5", true},
	} {
		if got := exposed(&net.TCPAddr{IP: net.ParseIP(c.ip), Port: 9470}); got != c.want {
			t.Errorf("%s: exposed %v, want %v", c.ip, got, c.want)
		}
	}
	var buf syncBuffer
	warnExposed(slog.New(slog.NewTextHandler(&buf, nil)), "monitor.yaml", &net.TCPAddr{IP: net.IPv4zero, Port: 9470})
	if s := buf.String(); !strings.Contains(s, "level=WARN") || !strings.Contains(s, "0.0.0.0:9470") {
		t.Errorf("no warning for 0.0.0.0:9470: %q", s)
	}
}
