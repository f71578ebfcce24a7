// Package config reads and validates the service configuration file of
// `monitor run` (YAML). Errors name the file, the line where known, and the
// field.
package config

import (
	"bytes"
	"errors"
	"fmt"
	"net"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"
)

// Config is the whole service configuration.
type Config struct {
	// File is the path the configuration was read from.
	File string `yaml:"-"`
	// Database is the SQLite file holding readings, results and events.
	Database   string      `yaml:"database"`
	Retention  Retention   `yaml:"retention"`
	HTTP       HTTP        `yaml:"http"`
	Broker     Broker      `yaml:"broker"`
	Ingest     Ingest      `yaml:"ingest"`
	Epochs     Epochs      `yaml:"epochs"`
	Alarms     Alarms      `yaml:"alarms"`
	Structures []Structure `yaml:"structures"`
}

// Retention says how long each class of stored data is kept; zero keeps it
// for ever.
type Retention struct {
	Readings    Duration `yaml:"readings"`
	Results     Duration `yaml:"results"`
	DeadLetters Duration `yaml:"dead_letters"`
}

// HTTP configures the metrics, API and dashboard listener.
type HTTP struct {
	// Listen is host:port; it should be a loopback address unless a reverse
	// proxy with authentication fronts it.
	Listen string `yaml:"listen"`
}

// Broker configures the MQTT connection (and the embedded broker).
type Broker struct {
	Embedded        bool   `yaml:"embedded"`
	Listen          string `yaml:"listen"`
	URL             string `yaml:"url"`
	ClientID        string `yaml:"client_id"`
	Username        string `yaml:"username"`
	PasswordFile    string `yaml:"password_file"`
	TLS             TLS    `yaml:"tls"`
	MaxPayloadBytes int    `yaml:"max_payload_bytes"`
	// Password is read from PasswordFile at load time; never from the YAML.
	Password string `yaml:"-"`
}

// TLS names the files for a TLS connection to the broker.
type TLS struct {
	CAFile   string `yaml:"ca_file"`
	CertFile string `yaml:"cert_file"`
	KeyFile  string `yaml:"key_file"`
}

// Ingest configures what ingest accepts and keeps of what it refuses. Zero
// values take the defaults of the packages that own them.
type Ingest struct {
	// MaxAhead and MaxBehind bound a reading's time around the receiver's
	// clock; readings outside are dead letters outside_time_window.
	// Defaults 10m ahead (ingest.DefaultMaxAhead) and 30d behind
	// (ingest.DefaultMaxBehind).
	MaxAhead  Duration `yaml:"max_ahead"`
	MaxBehind Duration `yaml:"max_behind"`
	// MaxDeadLetters caps the dead-letter rows kept (oldest dropped first,
	// counted in shm_dead_letters_dropped_total). Default 50000
	// (store.DefaultMaxDeadLetters), at most about 115 MB.
	MaxDeadLetters int `yaml:"max_dead_letters"`
	// Subscribe is "all" (the default: every structure's topics, so a
	// logger publishing under a structure name this instance does not
	// monitor leaves a dead letter unknown_structure instead of vanishing)
	// or "configured" (only this instance's structures: for instances that
	// share a broker, each serving its own structures, deploy/README.md
	// "Scaling out").
	Subscribe string `yaml:"subscribe"`
}

// Epochs configures the epoch assembler.
type Epochs struct {
	Window      Duration `yaml:"window"`
	MaxLateness Duration `yaml:"max_lateness"`
	// MissingLoad is "skip" (an epoch with a missing load channel is not
	// reconciled) or "estimate" (that pattern becomes an unknown).
	MissingLoad string `yaml:"missing_load"`
	// QueueReadings bounds, per structure, the committed readings held in
	// memory waiting for reconciliation (the queue between the ingest's
	// commits and the pipeline). Readings that find it full are counted
	// (shm_reconcile_queue_overflow_readings_total) and read back from the
	// store when reconciliation reaches them; the acknowledgement never
	// waits. 0 takes the default, DefaultQueueReadings.
	QueueReadings int `yaml:"queue_readings"`
}

// DefaultQueueReadings is the default bound of the reconciliation queue:
// 2^20 readings, about 50 MB (48 bytes a reading), four hours of a
// structure of 70 channels at 1 Hz.
const DefaultQueueReadings = 1 << 20

// Alarms configures the alarm rules' limits.
type Alarms struct {
	SilentAfter         Duration `yaml:"silent_after"`
	RejectRatePerMinute float64  `yaml:"reject_rate_per_minute"`
}

// Structure names one monitored structure's files.
type Structure struct {
	Structure string `yaml:"structure"`
	Sensors   string `yaml:"sensors"`
}

// Duration is a time.Duration that also accepts a day suffix ("400d").
type Duration time.Duration

// UnmarshalYAML parses "1s", "5m", "400d" or "1d12h".
func (d *Duration) UnmarshalYAML(n *yaml.Node) error {
	v, err := ParseDuration(n.Value)
	if err != nil {
		return fmt.Errorf("line %d: %w", n.Line, err)
	}
	*d = Duration(v)
	return nil
}

// D returns the value as a time.Duration.
func (d Duration) D() time.Duration { return time.Duration(d) }

// ParseDuration parses a Go duration with an optional leading day count
// ("30d", "1d12h").
func ParseDuration(s string) (time.Duration, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, errors.New("empty duration; write for example 1s, 5m or 30d")
	}
	var days time.Duration
	if i := strings.IndexByte(s, 'd'); i > 0 {
		n, err := strconv.ParseFloat(s[:i], 64)
		if err != nil || n < 0 {
			return 0, fmt.Errorf("duration %q: bad day count; write for example 30d", s)
		}
		days = time.Duration(n * float64(24*time.Hour))
		s = s[i+1:]
		if s == "" {
			return days, nil
		}
	}
	v, err := time.ParseDuration(s)
	if err != nil {
		return 0, fmt.Errorf("duration %q: %w (units: ns, us, ms, s, m, h, d)", s, err)
	}
	if v < 0 {
		return 0, fmt.Errorf("duration %q is negative", s)
	}
	return days + v, nil
}

// Defaults returns the configuration used when a field is left out.
func Defaults() Config {
	return Config{
		Database: "monitor.db",
		HTTP:     HTTP{Listen: "127.0.0.1:9470"},
		Broker: Broker{
			Listen:          "127.0.0.1:1883",
			URL:             "tcp://127.0.0.1:1883",
			ClientID:        "trussmonitor",
			MaxPayloadBytes: 64 << 10,
		},
		Ingest: Ingest{Subscribe: "all"},
		Epochs: Epochs{Window: Duration(time.Second), MaxLateness: Duration(5 * time.Second), MissingLoad: "skip"},
		Alarms: Alarms{SilentAfter: Duration(5 * time.Minute), RejectRatePerMinute: 30},
	}
}

// Load reads, decodes (unknown fields rejected) and validates a file.
// Relative paths inside the file are taken relative to the file's folder.
func Load(path string) (*Config, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("config: %w", err)
	}
	return Parse(path, data)
}

// Parse decodes and validates configuration bytes read from file.
func Parse(file string, data []byte) (*Config, error) {
	c := Defaults()
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(&c); err != nil {
		return nil, fmt.Errorf("%s: %w (see deploy/monitor.yaml for every field)", file, err)
	}
	c.File = file
	base := filepath.Dir(file)
	rel := func(p string) string {
		if p == "" || filepath.IsAbs(p) {
			return p
		}
		return filepath.Join(base, p)
	}
	c.Database = rel(c.Database)
	c.Broker.PasswordFile = rel(c.Broker.PasswordFile)
	c.Broker.TLS.CAFile = rel(c.Broker.TLS.CAFile)
	c.Broker.TLS.CertFile = rel(c.Broker.TLS.CertFile)
	c.Broker.TLS.KeyFile = rel(c.Broker.TLS.KeyFile)
	for i := range c.Structures {
		c.Structures[i].Structure = rel(c.Structures[i].Structure)
		c.Structures[i].Sensors = rel(c.Structures[i].Sensors)
	}
	if err := c.Validate(); err != nil {
		return nil, err
	}
	if c.Broker.PasswordFile != "" {
		pw, err := os.ReadFile(c.Broker.PasswordFile)
		if err != nil {
			return nil, fmt.Errorf("%s: broker.password_file: %w", file, err)
		}
		c.Broker.Password = strings.TrimRight(string(pw), "\r\n")
	}
	return &c, nil
}

// Validate checks values and cross-field rules, returning every problem.
func (c *Config) Validate() error {
	var errs []error
	bad := func(field, format string, a ...any) {
		errs = append(errs, fmt.Errorf("%s: %s: %s", c.File, field, fmt.Sprintf(format, a...)))
	}
	if c.Database == "" {
		bad("database", "is empty; give the SQLite file path")
	}
	if _, _, err := net.SplitHostPort(c.HTTP.Listen); err != nil {
		bad("http.listen", "%q is not host:port (%v)", c.HTTP.Listen, err)
	}
	if c.Broker.Embedded {
		if _, _, err := net.SplitHostPort(c.Broker.Listen); err != nil {
			bad("broker.listen", "%q is not host:port (%v)", c.Broker.Listen, err)
		}
	} else {
		u, err := url.Parse(c.Broker.URL)
		switch {
		case err != nil:
			bad("broker.url", "%q: %v", c.Broker.URL, err)
		case u.Scheme != "tcp" && u.Scheme != "ssl" && u.Scheme != "tls" && u.Scheme != "mqtt" && u.Scheme != "mqtts":
			bad("broker.url", "scheme %q not supported; use tcp:// or ssl://", u.Scheme)
		case u.Host == "":
			bad("broker.url", "%q has no host:port", c.Broker.URL)
		}
	}
	if c.Broker.ClientID == "" {
		bad("broker.client_id", "is empty; a fixed client id is needed for the persistent session")
	}
	if (c.Broker.TLS.CertFile == "") != (c.Broker.TLS.KeyFile == "") {
		bad("broker.tls", "cert_file and key_file must be given together")
	}
	if c.Broker.MaxPayloadBytes <= 0 {
		bad("broker.max_payload_bytes", "must be positive, got %d", c.Broker.MaxPayloadBytes)
	}
	if c.Ingest.Subscribe != "all" && c.Ingest.Subscribe != "configured" {
		bad("ingest.subscribe", "is %q; use all (every structure's topics) or configured (only this instance's structures)", c.Ingest.Subscribe)
	}
	if c.Ingest.MaxDeadLetters < 0 {
		bad("ingest.max_dead_letters", "must not be negative (0 takes the default)")
	}
	if c.Epochs.Window.D() <= 0 {
		bad("epochs.window", "must be positive")
	}
	if c.Epochs.QueueReadings < 0 {
		bad("epochs.queue_readings", "must not be negative (0 takes the default, %d)", DefaultQueueReadings)
	}
	if c.Epochs.MaxLateness.D() < 0 {
		bad("epochs.max_lateness", "must not be negative")
	}
	if c.Epochs.MissingLoad != "skip" && c.Epochs.MissingLoad != "estimate" {
		bad("epochs.missing_load", "is %q; use skip or estimate", c.Epochs.MissingLoad)
	}
	if c.Alarms.SilentAfter.D() <= 0 {
		bad("alarms.silent_after", "must be positive")
	}
	if c.Alarms.RejectRatePerMinute <= 0 {
		bad("alarms.reject_rate_per_minute", "must be positive")
	}
	if len(c.Structures) == 0 {
		bad("structures", "is empty; list at least one {structure: FILE, sensors: FILE}")
	}
	for i, s := range c.Structures {
		if s.Structure == "" {
			bad(fmt.Sprintf("structures[%d].structure", i), "is empty")
		} else if _, err := os.Stat(s.Structure); err != nil {
			bad(fmt.Sprintf("structures[%d].structure", i), "%v", err)
		}
		if s.Sensors == "" {
			bad(fmt.Sprintf("structures[%d].sensors", i), "is empty")
		} else if _, err := os.Stat(s.Sensors); err != nil {
			bad(fmt.Sprintf("structures[%d].sensors", i), "%v", err)
		}
	}
	return errors.Join(errs...)
}
