package mosquitto

import (
	"bufio"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"go.yaml.in/yaml/v3"
)

// readmeSection returns the shell lines of the ```sh blocks of section n
// ("## n.") of ../README.md, continuation lines joined.
func readmeSection(t *testing.T, n int) []string {
	t.Helper()
	b, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	head := fmt.Sprintf("## %d.", n)
	var lines []string
	in, block := false, false
	sc := bufio.NewScanner(strings.NewReader(string(b)))
	for sc.Scan() {
		l := sc.Text()
		switch {
		case strings.HasPrefix(l, "## "):
			in = strings.HasPrefix(l, head)
		case in && strings.HasPrefix(l, "```sh"):
			block = true
		case in && block && strings.HasPrefix(l, "```"):
			block = false
		case in && block:
			if k := len(lines) - 1; k >= 0 && strings.HasSuffix(lines[k], "\\") {
				lines[k] = strings.TrimSuffix(lines[k], "\\") + " " + strings.TrimSpace(l)
				continue
			}
			lines = append(lines, strings.TrimSpace(l))
		}
	}
	if len(lines) == 0 {
		t.Fatalf("../README.md has no sh block in section %d", n)
	}
	return lines
}

// site maps the installation paths of the README to a test folder.
type site struct{ dir string }

func (s site) path(p string) string {
	for _, prefix := range []string{"/etc/mosquitto/", "/var/lib/mosquitto/"} {
		if rest, ok := strings.CutPrefix(p, prefix); ok {
			return filepath.Join(s.dir, rest)
		}
	}
	return p
}

// monitorAccount returns the broker user name and the structure folders
// of the example monitor.yaml.
func monitorAccount(t *testing.T) (user string, structures []string) {
	t.Helper()
	b, err := os.ReadFile("../monitor.yaml")
	if err != nil {
		t.Fatal(err)
	}
	var cfg struct {
		Broker struct {
			Username string `yaml:"username"`
		} `yaml:"broker"`
		Structures []struct {
			Structure string `yaml:"structure"`
		} `yaml:"structures"`
	}
	if err := yaml.Unmarshal(b, &cfg); err != nil {
		t.Fatal(err)
	}
	for _, s := range cfg.Structures {
		structures = append(structures, filepath.Base(filepath.Dir(s.Structure)))
	}
	return cfg.Broker.Username, structures
}

// TestReadmeBrokerSteps follows section 3 of deploy/README.md on a
// Mosquitto of the test's own: the README's install and mosquitto_passwd
// lines (paths moved to a temporary folder, passwords given with -b instead
// of at the prompt), and mosquitto.conf with only the listener (a plain
// loopback port chosen free instead of TLS on 8883) and the paths adapted.
// The logger account the README creates must get its readings to the
// monitor's account, and must not be able to write another structure's
// topics; nor may a second structure's logger write the first one's.
//
// Before the fix it failed: the README created logger-alder-creek, the ACL
// granted alder-logger (so the README's logger was refused every write) and
// granted shm/# (so any logger could forge any structure's readings).
func TestReadmeBrokerSteps(t *testing.T) {
	bin := mosquittoBinary(t)
	passwd, err := exec.LookPath("mosquitto_passwd")
	if err != nil {
		skipOrFail(t, "mosquitto_passwd not found; apt-get install mosquitto")
	}
	s := site{dir: t.TempDir()}
	monitorUser, structures := monitorAccount(t)
	if len(structures) == 0 {
		t.Fatal("monitor.yaml lists no structure")
	}
	password := func(user string) string { return "pw-" + user }
	var accounts []string
	for _, line := range readmeSection(t, 3) {
		f := strings.Fields(line)
		if len(f) == 0 || strings.HasPrefix(f[0], "#") {
			continue
		}
		switch f[0] {
		case "mosquitto_passwd":
			args := []string{"-b"}
			rest := f[1:]
			if len(rest) > 0 && rest[0] == "-c" {
				args, rest = append(args, "-c"), rest[1:]
			}
			if len(rest) != 2 {
				t.Fatalf("README line %q: expected mosquitto_passwd [-c] FILE USER", line)
			}
			user := rest[1]
			accounts = append(accounts, user)
			args = append(args, s.path(rest[0]), user, password(user))
			if out, err := exec.Command(passwd, args...).CombinedOutput(); err != nil {
				t.Fatalf("README line %q: %v\n%s", line, err, out)
			}
		case "install":
			// install [-m MODE] [-o U] [-g G] SRC DST: only the files
			// of this folder that go to the broker.
			if len(f) < 3 || !strings.HasPrefix(f[len(f)-1], "/etc/mosquitto/") {
				continue
			}
			src := f[len(f)-2]
			local, ok := strings.CutPrefix(src, "deploy/mosquitto/")
			if !ok {
				t.Fatalf("README line %q installs %s, not a file of deploy/mosquitto", line, src)
			}
			b, err := os.ReadFile(local)
			if err != nil {
				t.Fatalf("README line %q: %v", line, err)
			}
			dst := s.path(f[len(f)-1])
			if strings.HasSuffix(f[len(f)-1], "/") {
				dst = filepath.Join(dst, filepath.Base(local))
			}
			if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(dst, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	var loggers []string
	for _, a := range accounts {
		if a != monitorUser {
			loggers = append(loggers, a)
		}
	}
	if !contains(accounts, monitorUser) || len(loggers) != 1 {
		t.Fatalf("README section 3 creates accounts %v; want the monitor's %q (monitor.yaml) and one logger", accounts, monitorUser)
	}
	logger, structure := loggers[0], structures[0]

	// The configuration as installed, with the port and paths adapted.
	lines, values := directives(t, "mosquitto.conf")
	for _, k := range []string{"password_file", "acl_file"} {
		if _, err := os.Stat(s.path(values[k])); err != nil {
			t.Fatalf("mosquitto.conf's %s %s is not created by README section 3's steps: %v", k, values[k], err)
		}
	}
	// A second structure's logger, as the README says to add one.
	const other = "north-roof"
	if out, err := exec.Command(passwd, "-b", s.path(values["password_file"]), other, password(other)).CombinedOutput(); err != nil {
		t.Fatalf("adding a second logger: %v\n%s", err, out)
	}
	addr, _ := startMosquitto(t, bin, s.dir, lines, func(key, val string) (string, bool) {
		switch key {
		case "listener", "protocol", "cafile", "certfile", "keyfile", "tls_version", "require_certificate":
			return "", false // TLS listener: replaced by the loopback listener
		case "log_dest":
			return "file " + filepath.Join(s.dir, "mosquitto.log"), true
		case "password_file", "acl_file", "persistence_location":
			return s.path(val), true
		}
		return val, true
	})

	mon, err := connect(addr, monitorUser, password(monitorUser))
	if err != nil {
		t.Fatalf("the monitor's account %q: %v", monitorUser, err)
	}
	defer mon.Disconnect(50)
	var mu sync.Mutex
	var got []string
	arrived := make(chan struct{}, 100)
	if tok := mon.Subscribe("shm/#", 1, func(_ paho.Client, m paho.Message) {
		mu.Lock()
		got = append(got, m.Topic()+" "+string(m.Payload()))
		mu.Unlock()
		arrived <- struct{}{}
	}); !tok.WaitTimeout(waitLimit) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	lg, err := connect(addr, logger, password(logger))
	if err != nil {
		t.Fatalf("the README's logger account %q: %v", logger, err)
	}
	defer lg.Disconnect(50)
	lg2, err := connect(addr, other, password(other))
	if err != nil {
		t.Fatalf("second logger %q: %v", other, err)
	}
	defer lg2.Disconnect(50)

	pack := `[{"bn":"%s/","bt":1772366400,"n":"B2_a","u":"/","v":1.5e-4}]`
	publish := func(c paho.Client, topic, payload string) {
		tok := c.Publish(topic, 1, false, payload)
		if !tok.WaitTimeout(waitLimit) {
			t.Fatalf("publish to %s: no acknowledgement", topic)
		}
		// Mosquitto 2 acknowledges a QoS 1 message the ACL denies (MQTT
		// 3.1.1 has no way to refuse it) and drops it.
	}
	// Forged first, then the genuine ones: one connection's messages reach
	// a subscriber in order, so once the genuine ones arrived a forged
	// message let through would have arrived before them.
	publish(lg, "shm/"+other+"/B1_a", fmt.Sprintf(pack, "forged-by-"+logger))
	publish(lg2, "shm/"+structure+"/B2_a", fmt.Sprintf(pack, "forged-by-"+other))
	publish(lg2, "shm/"+structure, fmt.Sprintf(pack, "forged-by-"+other))
	publish(lg, "shm/"+structure+"/B2_a", fmt.Sprintf(pack, "genuine-channel"))
	publish(lg, "shm/"+structure, fmt.Sprintf(pack, "genuine-pack"))
	publish(lg2, "shm/"+other, fmt.Sprintf(pack, "genuine-other"))
	want := []string{"genuine-channel", "genuine-pack", "genuine-other"}
	deadline := time.After(waitLimit)
	for {
		mu.Lock()
		n := 0
		for _, w := range want {
			for _, g := range got {
				if strings.Contains(g, w) {
					n++
					break
				}
			}
		}
		all := n == len(want)
		mu.Unlock()
		if all {
			break
		}
		select {
		case <-arrived:
		case <-deadline:
			mu.Lock()
			t.Fatalf("the monitor received %q; want the genuine readings of %s (as %s) and %s (ACL?)", got, structure, logger, other)
		}
	}
	mu.Lock()
	defer mu.Unlock()
	for _, g := range got {
		if strings.Contains(g, "forged") {
			t.Errorf("a forged reading reached the monitor: %s", g)
		}
	}
	if len(got) != len(want) {
		t.Errorf("the monitor received %d messages, want %d: %q", len(got), len(want), got)
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
