// Package mosquitto holds the production Mosquitto configuration of the
// truss monitor and the test that validates it against a real mosquitto.
package mosquitto

import (
	"bufio"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
)

// Directives replaced in the test variant: the TLS listener and the
// installation paths. Everything else (limits, persistence, authentication)
// is kept as written, so mosquitto parses and applies it.
var replaced = map[string]bool{
	"listener": true, "protocol": true, "cafile": true, "certfile": true, "keyfile": true,
	"tls_version": true, "require_certificate": true, "password_file": true, "acl_file": true,
	"persistence_location": true, "log_dest": true,
}

func directives(t *testing.T, path string) (lines []string, values map[string]string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	values = map[string]string{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		key, val, _ := strings.Cut(line, " ")
		values[key] = strings.TrimSpace(val)
		lines = append(lines, line)
	}
	return lines, values
}

// TestProductionSettings checks the settings the monitor depends on.
func TestProductionSettings(t *testing.T) {
	_, v := directives(t, "mosquitto.conf")
	want := map[string]string{
		"listener":              "8883",
		"allow_anonymous":       "false",
		"persistence":           "true",
		"password_file":         "/etc/mosquitto/trussmonitor.passwd",
		"per_listener_settings": "false",
		"max_inflight_messages": "1000",
		"max_queued_messages":   "1000000",
		"max_queued_bytes":      "1073741824",
	}
	for k, w := range want {
		if v[k] != w {
			t.Errorf("%s = %q, want %q", k, v[k], w)
		}
	}
	for _, k := range []string{"cafile", "certfile", "keyfile"} {
		if v[k] == "" {
			t.Errorf("TLS listener without %s", k)
		}
	}
}

const requireEnv = "TRUSSMON_REQUIRE_TOOLS"

// waitLimit bounds each wait for the broker; it only ends a test that would
// otherwise hang (a loaded machine still answers well within it).
const waitLimit = 2 * time.Minute

func skipOrFail(t *testing.T, msg string) {
	t.Helper()
	if os.Getenv(requireEnv) == "1" {
		t.Fatalf("%s (%s=1 makes this a failure)", msg, requireEnv)
	}
	t.Skip(msg)
}

func mosquittoBinary(t *testing.T) string {
	t.Helper()
	bin, err := exec.LookPath("mosquitto")
	if err != nil {
		skipOrFail(t, "mosquitto binary not found; apt-get install mosquitto")
	}
	return bin
}

func connect(addr, user, pass string) (paho.Client, error) {
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(fmt.Sprintf("cfgtest-%s-%d", user, time.Now().UnixNano())).
		SetUsername(user).SetPassword(pass).SetAutoReconnect(false).SetConnectTimeout(waitLimit)
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(waitLimit) {
		return nil, fmt.Errorf("connect timed out")
	}
	return c, tok.Error()
}

// startMosquitto writes the directives lines, each passed through adapt
// (which returns the value to keep, or false to drop the line), plus a
// plain listener on a free loopback port, starts mosquitto on it in dir and
// returns the listener's address and a function that kills the broker
// (SIGKILL, as a crash or power loss would) and waits for it to exit. It
// stops the broker (SIGINT) at the end of the test.
func startMosquitto(t *testing.T, bin, dir string, lines []string, adapt func(key, val string) (string, bool)) (string, func()) {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	var b strings.Builder
	if os.Geteuid() == 0 {
		// As root mosquitto switches to user "mosquitto", which cannot
		// read the test's private temp dir.
		b.WriteString("user root\n")
	}
	fmt.Fprintf(&b, "listener %d 127.0.0.1\n", port)
	for _, line := range lines {
		key, val, _ := strings.Cut(line, " ")
		if v, ok := adapt(key, strings.TrimSpace(val)); ok {
			b.WriteString(key + " " + v + "\n")
		}
	}
	conf := filepath.Join(dir, "test.conf")
	if err := os.WriteFile(conf, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(bin, "-c", conf)
	var out strings.Builder
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan struct{})
	go func() { cmd.Wait(); close(exited) }()
	t.Cleanup(func() {
		cmd.Process.Signal(os.Interrupt)
		<-exited
	})
	kill := func() {
		cmd.Process.Kill()
		<-exited
	}
	addr := fmt.Sprintf("127.0.0.1:%d", port)
	for {
		c, err := net.DialTimeout("tcp", addr, time.Second)
		if err == nil {
			c.Close()
			return addr, kill
		}
		select {
		case <-exited:
			log, _ := os.ReadFile(filepath.Join(dir, "mosquitto.log"))
			t.Fatalf("mosquitto exited with the test variant of mosquitto.conf:\n%s\n%s\nconfig:\n%s", out.String(), log, b.String())
		case <-time.After(50 * time.Millisecond):
		}
	}
}

// TestConfigWithMosquitto starts mosquitto with a test variant of
// mosquitto.conf (same limits and authentication, a plain loopback listener
// on a spare port, the example password and ACL files) and checks that the
// password is required and the ACL lets readings through.
func TestConfigWithMosquitto(t *testing.T) {
	bin := mosquittoBinary(t)
	dir := t.TempDir()
	lines, _ := directives(t, "mosquitto.conf")
	abs := func(p string) string { a, _ := filepath.Abs(p); return a }
	addr, _ := startMosquitto(t, bin, dir, lines, func(key, val string) (string, bool) {
		switch key {
		case "password_file":
			return abs("passwd.example"), true
		case "acl_file":
			return abs("acl.example"), true
		case "persistence_location":
			return dir + "/", true
		case "log_dest":
			return "file " + filepath.Join(dir, "mosquitto.log"), true
		}
		return val, !replaced[key]
	})

	for _, c := range []struct {
		name, user, pass string
		ok               bool
	}{
		{"monitor with its password", "trussmonitor", "demo-monitor-password", true},
		{"logger with its password", "alder-creek", "demo-logger-password", true},
		{"wrong password", "trussmonitor", "demo-logger-password", false},
		{"no credentials (anonymous)", "", "", false},
		{"unknown user", "guest", "guest", false},
	} {
		cl, err := connect(addr, c.user, c.pass)
		switch {
		case c.ok && err != nil:
			t.Errorf("%s: refused: %v", c.name, err)
		case !c.ok && err == nil:
			t.Errorf("%s: accepted", c.name)
		}
		if err == nil {
			cl.Disconnect(50)
		}
	}

	// The ACL: the logger's reading reaches the monitor.
	mon, err := connect(addr, "trussmonitor", "demo-monitor-password")
	if err != nil {
		t.Fatal(err)
	}
	defer mon.Disconnect(50)
	got := make(chan string, 1)
	if tok := mon.Subscribe("shm/#", 1, func(_ paho.Client, m paho.Message) { got <- string(m.Payload()) }); !tok.WaitTimeout(waitLimit) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	lg, err := connect(addr, "alder-creek", "demo-logger-password")
	if err != nil {
		t.Fatal(err)
	}
	defer lg.Disconnect(50)
	payload := `[{"bt":1772366400,"n":"g1","u":"/","v":1.5e-4}]`
	lg.Publish("shm/alder-creek", 1, false, payload).WaitTimeout(waitLimit)
	select {
	case p := <-got:
		if p != payload {
			t.Fatalf("monitor received %q", p)
		}
	case <-time.After(waitLimit):
		t.Fatal("the logger's reading did not reach the monitor (ACL?)")
	}
}
