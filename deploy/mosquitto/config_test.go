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

func connect(addr, user, pass string) (paho.Client, error) {
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(fmt.Sprintf("cfgtest-%s-%d", user, time.Now().UnixNano())).
		SetUsername(user).SetPassword(pass).SetAutoReconnect(false).SetConnectTimeout(3 * time.Second)
	c := paho.NewClient(o)
	tok := c.Connect()
	if !tok.WaitTimeout(5 * time.Second) {
		return nil, fmt.Errorf("connect timed out")
	}
	return c, tok.Error()
}

// TestConfigWithMosquitto starts mosquitto with a test variant of
// mosquitto.conf (same limits and authentication, a plain loopback listener
// on a spare port, the example password and ACL files) and checks that the
// password is required and the ACL lets readings through.
func TestConfigWithMosquitto(t *testing.T) {
	bin, err := exec.LookPath("mosquitto")
	if err != nil {
		if os.Getenv(requireEnv) == "1" {
			t.Fatalf("mosquitto binary not found (%s=1 makes this a failure); apt-get install mosquitto", requireEnv)
		}
		t.Skip("mosquitto binary not found; apt-get install mosquitto")
	}
	dir := t.TempDir()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := l.Addr().(*net.TCPAddr).Port
	l.Close()
	lines, _ := directives(t, "mosquitto.conf")
	var b strings.Builder
	if os.Geteuid() == 0 {
		// As root mosquitto switches to user "mosquitto", which cannot
		// read the test's private temp dir.
		b.WriteString("user root\n")
	}
	for _, line := range lines {
		key, _, _ := strings.Cut(line, " ")
		if !replaced[key] {
			b.WriteString(line + "\n")
		}
	}
	abs := func(p string) string { a, _ := filepath.Abs(p); return a }
	fmt.Fprintf(&b, "listener %d 127.0.0.1\npassword_file %s\nacl_file %s\npersistence_location %s/\nlog_dest file %s\n",
		port, abs("passwd.example"), abs("acl.example"), dir, filepath.Join(dir, "mosquitto.log"))
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
	defer func() {
		cmd.Process.Signal(os.Interrupt)
		cmd.Wait()
	}()
	addr := fmt.Sprintf("127.0.0.1:%d", port)
	deadline := time.Now().Add(10 * time.Second)
	for {
		c, err := net.DialTimeout("tcp", addr, 200*time.Millisecond)
		if err == nil {
			c.Close()
			break
		}
		if time.Now().After(deadline) {
			log, _ := os.ReadFile(filepath.Join(dir, "mosquitto.log"))
			t.Fatalf("mosquitto did not start with the test variant of mosquitto.conf:\n%s\n%s\nconfig:\n%s", out.String(), log, b.String())
		}
		time.Sleep(50 * time.Millisecond)
	}

	for _, c := range []struct {
		name, user, pass string
		ok               bool
	}{
		{"monitor with its password", "trussmonitor", "demo-monitor-password", true},
		{"logger with its password", "alder-logger", "demo-logger-password", true},
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
	if tok := mon.Subscribe("shm/#", 1, func(_ paho.Client, m paho.Message) { got <- string(m.Payload()) }); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	lg, err := connect(addr, "alder-logger", "demo-logger-password")
	if err != nil {
		t.Fatal(err)
	}
	defer lg.Disconnect(50)
	payload := `[{"bt":1772366400,"n":"g1","u":"/","v":1.5e-4}]`
	lg.Publish("shm/alder-creek", 1, false, payload).WaitTimeout(5 * time.Second)
	select {
	case p := <-got:
		if p != payload {
			t.Fatalf("monitor received %q", p)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("the logger's reading did not reach the monitor (ACL?)")
	}
}
