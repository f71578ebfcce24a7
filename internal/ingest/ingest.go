// Package ingest receives readings over MQTT and stores them durably,
// exactly once, before acknowledging them.
//
// Flow: paho's message handler only puts the message on a bounded queue and
// returns. One decoder goroutine turns each message into readings (SenML,
// RFC 8428) and validates them against the structure's channel registry; one
// committer goroutine takes what is queued (up to BatchSize messages),
// writes the readings and the dead letters of all of them in one SQLite
// transaction, and only then hands the messages, in arrival order, to the
// acknowledger, which sends the PUBACKs. Nothing is acknowledged before it is
// committed: a crash at any point leaves unacknowledged messages at the
// broker, which redelivers them on the next connection (persistent session),
// and the store's (channel, time) key drops the copies.
//
// Topics: shm/<structure>/<channel> carries a SenML pack whose records have
// no name or the channel's name; shm/<structure> carries a pack whose records
// are named by channel.
//
// Queue full: the handler never blocks paho's read loop (a blocked loop
// stops keep-alive handling and the broker would drop the connection). The
// queue is sized above the broker's per-client in-flight limit, so with a
// correctly configured broker it cannot fill: the broker stops sending when
// that many messages are unacknowledged. If it fills anyway, the message is
// left unacknowledged (counted as a queue overflow) and, once the queue has
// drained, the client reconnects so the broker redelivers it. Nothing is lost;
// the price is duplicates, which the store ignores.
package ingest

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/senml"
	"trussmonitor/internal/store"
)

// Registry validates readings of one structure's channels. Errors should
// implement Reason() string ("unknown_channel", "unit_mismatch",
// "out_of_range", "not_finite"); others are counted as "invalid_reading".
type Registry interface {
	Validate(channel, unit string, value float64) error
}

// Observer receives ingest counts (metrics). Outcomes are "stored",
// "duplicate", "rejected" (and "late", reported by the epoch assembler).
// Rejected is called once per dead letter (one per message and reason).
// Methods are called from ingest's goroutines and must not block.
type Observer interface {
	MessageHandled(structure, outcome string)
	ReadingsHandled(structure, outcome string, n int)
	Rejected(structure, reason string)
	LastReading(structure, channel string, t time.Time)
	BrokerDropped(n int)
	// DeadLettersDropped counts the oldest dead letters dropped to keep
	// the store under its cap.
	DeadLettersDropped(n int)
	// CommitFailed counts one failed store commit (retried).
	CommitFailed()
	// BrokerConnection reports that ingest is now connected and
	// subscribed (reconnect: not the first connection), or lost it.
	BrokerConnection(connected, reconnect bool)
}

// Message outcomes.
const (
	OutcomeStored    = "stored"
	OutcomeDuplicate = "duplicate"
	OutcomeRejected  = "rejected"
	OutcomeLate      = "late"
)

// Config configures the MQTT client and the ingest limits. Zero values take
// the defaults named on each field.
type Config struct {
	// Broker is the broker URL: tcp://host:1883, or ssl://host:8883 (also
	// tls://) for TLS.
	Broker string `yaml:"broker"`
	// ClientID is fixed so the broker keeps the session (and the messages
	// queued while the monitor is down) between runs. Required.
	ClientID string `yaml:"client_id"`
	Username string `yaml:"username"`
	Password string `yaml:"password"`
	// CAFile is a PEM file of CA certificates trusted for the broker's
	// certificate (system roots when empty).
	CAFile string `yaml:"ca_file"`
	// CertFile and KeyFile are the client certificate and key (PEM) for
	// brokers that require client certificates.
	CertFile string `yaml:"cert_file"`
	KeyFile  string `yaml:"key_file"`
	// ServerName overrides the name checked in the broker's certificate.
	ServerName string `yaml:"server_name"`
	// TopicPrefix is the first topic level. Default "shm".
	TopicPrefix string `yaml:"topic_prefix"`
	// SubscribeAll subscribes to every structure's topics (<prefix>/+ and
	// <prefix>/+/+), so that messages for a structure without a registry
	// are dead-lettered as unknown_structure. By default the ingest
	// subscribes only to the topics of its registries' structures
	// (<prefix>/<structure> and <prefix>/<structure>/+): instances that
	// serve different structures share a broker without receiving each
	// other's messages.
	SubscribeAll bool `yaml:"subscribe_all"`
	// MaxPayload is the largest accepted payload in bytes; larger ones are
	// dead-lettered (oversized_payload; the dead letter keeps an excerpt
	// of store.ExcerptBytes). Default 1 MiB; the service sets 64 KiB.
	MaxPayload int `yaml:"max_payload"`
	// QueueSize is the number of received messages waiting to be
	// committed. Keep it above the broker's per-client in-flight limit.
	// Default 65536.
	QueueSize int `yaml:"queue_size"`
	// BatchSize is the most messages committed in one transaction.
	// Default 2000.
	BatchSize int `yaml:"batch_size"`
	// BatchReadings ends a batch once it holds this many readings (large
	// transactions outgrow SQLite's page cache). Default 10000.
	BatchReadings int `yaml:"batch_readings"`
	// CommitDelay is the longest the committer waits for more messages
	// to join a transaction (group commit); nothing is acknowledged
	// before its commit, so this only adds latency. Default 2 ms; a
	// negative value commits whatever is queued at once.
	CommitDelay time.Duration `yaml:"commit_delay"`
	// CommitGap ends that wait early when no message arrives for this
	// long. Default 300 µs.
	CommitGap time.Duration `yaml:"commit_gap"`
	// MaxAbsValue rejects readings whose magnitude exceeds it as absurd
	// (before the registry's own range check). Default 1e12.
	MaxAbsValue float64 `yaml:"max_abs_value"`
	// AllowRelativeTime accepts SenML times relative to the receiver's
	// clock (RFC 8428 section 4.5.3). Off by default: a redelivered
	// relative-time reading gets a new timestamp and is stored twice.
	AllowRelativeTime bool `yaml:"allow_relative_time"`
	// MaxAhead and MaxBehind are the window around the receiver's clock
	// a reading's time must lie in (else outside_time_window). Defaults
	// DefaultMaxAhead (10 min) and DefaultMaxBehind (30 days); a negative
	// value removes the bound on that side.
	MaxAhead  time.Duration `yaml:"max_ahead"`
	MaxBehind time.Duration `yaml:"max_behind"`
	// ReconnectMin and ReconnectMax bound the reconnect backoff (doubling
	// from min to max). Defaults 1 s and 30 s.
	ReconnectMin time.Duration `yaml:"reconnect_min"`
	ReconnectMax time.Duration `yaml:"reconnect_max"`
	// KeepAlive is the MQTT keep-alive. Default 30 s.
	KeepAlive time.Duration `yaml:"keep_alive"`
	// LogEvery is the least time between two log lines of one rejection
	// reason. Default 1 min.
	LogEvery time.Duration `yaml:"log_every"`
	// ShutdownTimeout bounds the final commit and acknowledgement on
	// shutdown. Default 10 s.
	ShutdownTimeout time.Duration `yaml:"shutdown_timeout"`
}

func (c *Config) setDefaults() {
	if c.TopicPrefix == "" {
		c.TopicPrefix = "shm"
	}
	if c.MaxPayload <= 0 {
		c.MaxPayload = 1 << 20
	}
	if c.QueueSize <= 0 {
		c.QueueSize = 65536
	}
	if c.BatchSize <= 0 {
		c.BatchSize = 2000
	}
	if c.BatchReadings <= 0 {
		c.BatchReadings = 10000
	}
	if c.CommitDelay == 0 {
		c.CommitDelay = 2 * time.Millisecond
	}
	if c.CommitGap <= 0 {
		c.CommitGap = 300 * time.Microsecond
	}
	if c.MaxAbsValue <= 0 {
		c.MaxAbsValue = DefaultMaxAbsValue
	}
	if c.MaxAhead == 0 {
		c.MaxAhead = DefaultMaxAhead
	}
	if c.MaxBehind == 0 {
		c.MaxBehind = DefaultMaxBehind
	}
	if c.ReconnectMin <= 0 {
		c.ReconnectMin = time.Second
	}
	if c.ReconnectMax <= 0 {
		c.ReconnectMax = 30 * time.Second
	}
	if c.ReconnectMax < c.ReconnectMin {
		c.ReconnectMax = c.ReconnectMin
	}
	if c.KeepAlive <= 0 {
		c.KeepAlive = 30 * time.Second
	}
	if c.LogEvery <= 0 {
		c.LogEvery = time.Minute
	}
	if c.ShutdownTimeout <= 0 {
		c.ShutdownTimeout = 10 * time.Second
	}
}

// Deps are the parts ingest works with.
type Deps struct {
	Store *store.Store
	// Registries holds one channel registry per structure name; messages
	// for other structures are rejected as "unknown_structure".
	Registries map[string]Registry
	Observer   Observer // may be nil
	// OnCommitted receives the newly stored readings of each message after
	// they are committed (duplicates left out), in arrival order. It runs
	// on the committer goroutine: a slow callback slows ingestion.
	OnCommitted func(structure string, rs []store.Reading)
	// Fatigue, when set, counts fatigue from the new readings inside each
	// commit's transaction (see FatigueStager).
	Fatigue FatigueStager
	// BrokerDrops, when set, is polled every second and increases are
	// reported through Observer.BrokerDropped (e.g. broker.Broker.Dropped).
	BrokerDrops func() int64
	Logger      *slog.Logger     // nil discards
	Now         func() time.Time // receiver clock; nil means time.Now
}

// FatigueStager computes, inside a commit's transaction, the fatigue updates
// of the batch's new readings, and returns apply to call once the commit
// holds (a failed attempt is simply staged again). *fatiguetrack.Tracker
// implements it.
type FatigueStager interface {
	Stage(groups []store.Group, res store.CommitResult) (ups []store.FatigueUpdate, apply func(), err error)
}

// Stats are ingest's running totals.
type Stats struct {
	Messages       int64 // messages received and processed
	Stored         int64 // readings newly stored
	Duplicates     int64 // readings already stored (redeliveries)
	Rejected       map[string]int64
	QueueOverflows int64 // messages left unacknowledged for redelivery
	Commits        int64 // transactions
	Connects       int64 // successful (re)connections
	Subscribed     int64 // subscriptions confirmed by the broker (one per connection)
}

// Ingester is the MQTT-to-store ingestion. Create with New, start with Run.
type Ingester struct {
	cfg   Config
	deps  Deps
	obs   Observer
	log   *slog.Logger
	now   func() time.Time
	tls   *tls.Config
	limit *reasonLog

	client paho.Client
	connMu sync.Mutex // serialises the overflow reconnect with the final disconnect
	closed bool

	qmu      sync.RWMutex // guards stopping and the send on queue
	stopping bool
	queue    chan received
	done     <-chan struct{} // Run's context's Done: ends a retry's pause

	overflow atomic.Bool
	// Present state for readiness: connected and subscribed on the
	// current connection; the last commit's outcome.
	live          atomic.Bool
	commitFailing atomic.Bool
	failMu        sync.Mutex
	failSince     time.Time
	failErr       error
	stats         struct {
		sync.Mutex
		Stats
	}
}

type received struct {
	msg paho.Message
	at  time.Time
}

// New checks the configuration and prepares an Ingester.
func New(cfg Config, deps Deps) (*Ingester, error) {
	cfg.setDefaults()
	if cfg.Broker == "" {
		return nil, errors.New("ingest: config: broker URL is empty; set it, e.g. tcp://127.0.0.1:1883")
	}
	if cfg.ClientID == "" {
		return nil, errors.New("ingest: config: client_id is empty; a fixed client id keeps the broker session (and the messages queued for it) between restarts")
	}
	if deps.Store == nil {
		return nil, errors.New("ingest: no store")
	}
	if len(deps.Registries) == 0 {
		return nil, errors.New("ingest: no structure registries; every structure whose readings are ingested needs one")
	}
	in := &Ingester{cfg: cfg, deps: deps, obs: deps.Observer, log: deps.Logger, now: deps.Now}
	if in.obs == nil {
		in.obs = nopObserver{}
	}
	if in.log == nil {
		in.log = slog.New(slog.DiscardHandler)
	}
	if in.now == nil {
		in.now = time.Now
	}
	in.limit = newReasonLog(cfg.LogEvery)
	in.stats.Rejected = map[string]int64{}
	if u := strings.ToLower(cfg.Broker); strings.HasPrefix(u, "ssl://") || strings.HasPrefix(u, "tls://") || strings.HasPrefix(u, "mqtts://") || cfg.CAFile != "" || cfg.CertFile != "" {
		t, err := tlsConfig(cfg)
		if err != nil {
			return nil, err
		}
		in.tls = t
	}
	return in, nil
}

func tlsConfig(cfg Config) (*tls.Config, error) {
	t := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: cfg.ServerName}
	if cfg.CAFile != "" {
		pem, err := os.ReadFile(cfg.CAFile)
		if err != nil {
			return nil, fmt.Errorf("ingest: config: ca_file: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("ingest: config: ca_file %s: no PEM certificates found", cfg.CAFile)
		}
		t.RootCAs = pool
	}
	if (cfg.CertFile == "") != (cfg.KeyFile == "") {
		return nil, errors.New("ingest: config: cert_file and key_file go together; set both or neither")
	}
	if cfg.CertFile != "" {
		c, err := tls.LoadX509KeyPair(cfg.CertFile, cfg.KeyFile)
		if err != nil {
			return nil, fmt.Errorf("ingest: config: client certificate %s / %s: %w", cfg.CertFile, cfg.KeyFile, err)
		}
		t.Certificates = []tls.Certificate{c}
	}
	return t, nil
}

// Stats returns a copy of the running totals.
func (in *Ingester) Stats() Stats {
	in.stats.Lock()
	defer in.stats.Unlock()
	s := in.stats.Stats
	s.Rejected = make(map[string]int64, len(in.stats.Rejected))
	for k, v := range in.stats.Rejected {
		s.Rejected[k] = v
	}
	return s
}

func (in *Ingester) clientOptions() *paho.ClientOptions {
	o := paho.NewClientOptions().
		AddBroker(in.cfg.Broker).
		SetClientID(in.cfg.ClientID).
		SetCleanSession(false).
		SetAutoAckDisabled(true).
		SetOrderMatters(true).
		SetAutoReconnect(true).
		SetConnectRetry(true).
		SetConnectRetryInterval(in.cfg.ReconnectMin).
		SetMaxReconnectInterval(in.cfg.ReconnectMax).
		SetKeepAlive(in.cfg.KeepAlive).
		// MQTT 3.1.1 only: paho's fallback to 3.1 after a refused CONNECT
		// would replace the broker's reason (bad user name or password,
		// not authorised) with "unacceptable protocol version".
		SetProtocolVersion(4).
		SetConnectTimeout(10 * time.Second)
	if in.cfg.Username != "" {
		o.SetUsername(in.cfg.Username).SetPassword(in.cfg.Password)
	}
	if in.tls != nil {
		o.SetTLSConfig(in.tls)
	}
	// Messages the broker queued for the session arrive right after the
	// CONNACK, before any SUBSCRIBE: the default handler takes them.
	o.SetDefaultPublishHandler(in.onMessage)
	o.SetOnConnectHandler(in.onConnect)
	o.SetConnectionLostHandler(func(_ paho.Client, err error) {
		in.live.Store(false)
		in.obs.BrokerConnection(false, false)
		in.log.Warn("MQTT connection lost; reconnecting", "broker", in.cfg.Broker, "err", err)
	})
	// Every failed attempt (refused password, untrusted certificate,
	// unreachable broker) is logged with its reason: the first at once,
	// then at most once per LogEvery per distinct reason.
	o.SetConnectionNotificationHandler(func(_ paho.Client, n paho.ConnectionNotification) {
		var err error
		switch n := n.(type) {
		case paho.ConnectionNotificationBrokerFailed:
			err = n.Reason
		case paho.ConnectionNotificationFailed:
			err = n.Reason
		default:
			return
		}
		if err == nil {
			return
		}
		in.limit.log(in.log, "connect_failed:"+err.Error(), "MQTT connection to the broker failed; retrying",
			"broker", in.cfg.Broker, "user", in.cfg.Username, "err", err,
			"hint", "check broker URL, user name and password (broker.username/password), the CA file and the broker's ACL")
	})
	return o
}

// Health is ingest's present state, for readiness.
type Health struct {
	// Live is true while connected to the broker and subscribed on the
	// current connection.
	Live bool
	// CommitFailing is true while the latest store commit failed (it is
	// retried); FailingSince is when the failures began and Err the last.
	CommitFailing bool
	FailingSince  time.Time
	Err           error
}

// Health returns ingest's present state.
func (in *Ingester) Health() Health {
	h := Health{Live: in.live.Load(), CommitFailing: in.commitFailing.Load()}
	if h.CommitFailing {
		in.failMu.Lock()
		h.FailingSince, h.Err = in.failSince, in.failErr
		in.failMu.Unlock()
	}
	return h
}

// filters returns the topic filters to subscribe to (QoS 1) and the
// wildcard filters to remove from a persistent session.
func (in *Ingester) filters() (subscribe map[string]byte, unsubscribe []string) {
	p := in.cfg.TopicPrefix
	all := []string{p + "/+", p + "/+/+"}
	if in.cfg.SubscribeAll {
		return map[string]byte{all[0]: 1, all[1]: 1}, nil
	}
	subscribe = map[string]byte{}
	for name := range in.deps.Registries {
		subscribe[p+"/"+name] = 1
		subscribe[p+"/"+name+"/+"] = 1
	}
	return subscribe, all
}

// filterList renders topic filters for a log line, sorted.
func filterList(filters map[string]byte) string {
	var l []string
	for f := range filters {
		l = append(l, f)
	}
	sort.Strings(l)
	return strings.Join(l, " ")
}

// onConnect subscribes (again) on every connection. The broker keeps the
// subscription in the persistent session; subscribing again is harmless
// and covers a broker that lost its state.
func (in *Ingester) onConnect(c paho.Client) {
	in.stats.Lock()
	in.stats.Connects++
	reconnect := in.stats.Connects > 1
	in.stats.Unlock()
	filters, dropped := in.filters()
	if len(dropped) > 0 {
		// A persistent session keeps the subscriptions of an earlier run;
		// remove the wildcard ones that would bring other instances'
		// structures (harmless when they do not exist).
		c.Unsubscribe(dropped...)
	}
	tok := c.SubscribeMultiple(filters, nil)
	go func() {
		if !tok.WaitTimeout(30*time.Second) || tok.Error() != nil {
			in.log.Error("MQTT subscribe failed; reconnecting", "broker", in.cfg.Broker, "filters", filterList(filters), "err", tok.Error())
			return
		}
		in.stats.Lock()
		in.stats.Subscribed++
		in.stats.Unlock()
		in.live.Store(c.IsConnectionOpen())
		in.obs.BrokerConnection(true, reconnect)
		in.log.Info("MQTT connected and subscribed", "broker", in.cfg.Broker, "client_id", in.cfg.ClientID)
	}()
}

// onMessage is paho's handler: enqueue and return at once.
func (in *Ingester) onMessage(_ paho.Client, m paho.Message) {
	in.qmu.RLock()
	defer in.qmu.RUnlock()
	if in.stopping {
		return // not acknowledged: the broker redelivers it next session
	}
	select {
	case in.queue <- received{msg: m, at: in.now()}:
	default:
		in.overflow.Store(true)
		in.stats.Lock()
		in.stats.QueueOverflows++
		in.stats.Unlock()
		in.limit.log(in.log, "queue_full", "ingest queue full; message left unacknowledged for redelivery after a reconnect; raise queue_size above the broker's in-flight limit",
			"queue_size", in.cfg.QueueSize, "topic", m.Topic())
	}
}

// Run connects, ingests until ctx is cancelled, then stops taking messages,
// commits and acknowledges what was queued, and disconnects. It returns nil
// after a clean shutdown, or the error that stopped it.
func (in *Ingester) Run(ctx context.Context) error {
	in.queue = make(chan received, in.cfg.QueueSize)
	in.done = ctx.Done()
	decoded := make(chan decodedMsg, in.cfg.BatchSize)
	acks := make(chan ackItem, 64)
	in.client = paho.NewClient(in.clientOptions())
	in.client.Connect() // retries in the background (SetConnectRetry)

	var wg sync.WaitGroup
	wg.Add(3)
	go func() { defer wg.Done(); in.decodeLoop(in.queue, decoded) }()
	var commitErr error
	go func() { defer wg.Done(); commitErr = in.commitLoop(decoded, acks) }()
	go func() { defer wg.Done(); in.ackLoop(acks) }()
	pollDone := make(chan struct{})
	if in.deps.BrokerDrops != nil {
		go in.pollDrops(pollDone)
	}

	<-ctx.Done()
	// Stop consumption: later messages stay unacknowledged at the broker.
	in.qmu.Lock()
	in.stopping = true
	close(in.queue)
	in.qmu.Unlock()
	wg.Wait()
	close(pollDone)
	in.connMu.Lock()
	in.closed = true
	in.client.Disconnect(1000)
	in.connMu.Unlock()
	return commitErr
}

func (in *Ingester) pollDrops(done <-chan struct{}) {
	t := time.NewTicker(time.Second)
	defer t.Stop()
	var last int64
	for {
		select {
		case <-done:
			return
		case <-t.C:
			n := in.deps.BrokerDrops()
			if n > last {
				in.obs.BrokerDropped(int(n - last))
				in.log.Error("broker dropped QoS 1 messages (readings lost before reaching the monitor); raise the broker's in-flight and queue limits", "dropped", n-last, "total", n)
			}
			last = n
		}
	}
}

func (in *Ingester) decodeLoop(q <-chan received, out chan<- decodedMsg) {
	defer close(out)
	for r := range q {
		out <- in.decode(r)
	}
}

// commitLoop commits batches and passes the messages on for acknowledgement.
func (in *Ingester) commitLoop(in2 <-chan decodedMsg, acks chan<- ackItem) error {
	defer close(acks)
	batch := make([]decodedMsg, 0, in.cfg.BatchSize)
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	for {
		m, ok := <-in2
		if !ok {
			return nil
		}
		batch = append(batch[:0], m)
		rows := len(m.readings)
		first := time.Now()
	fill:
		for len(batch) < in.cfg.BatchSize && rows < in.cfg.BatchReadings {
			select {
			case m, ok := <-in2:
				if !ok {
					break fill
				}
				batch = append(batch, m)
				rows += len(m.readings)
				continue
			default:
			}
			// Group commit: a transaction costs about as much as a few
			// hundred rows, so wait a little for more messages, but not
			// past CommitDelay, and stop as soon as the stream pauses for
			// CommitGap (a broker's in-flight window may be full, waiting
			// for exactly these acknowledgements).
			left := in.cfg.CommitDelay - time.Since(first)
			if left <= 0 {
				break
			}
			timer.Reset(min(left, in.cfg.CommitGap))
			select {
			case m, ok := <-in2:
				if !timer.Stop() {
					<-timer.C
				}
				if !ok {
					break fill
				}
				batch = append(batch, m)
				rows += len(m.readings)
			case <-timer.C:
				break fill
			}
		}
		if err := in.commitBatch(batch, acks); err != nil {
			// Drain without acknowledging: the broker redelivers.
			for range in2 {
			}
			return err
		}
		if in.overflow.Load() && len(in.queue) == 0 && len(in2) == 0 {
			in.overflow.Store(false)
			// After the acknowledgements queued so far are sent.
			acks <- ackItem{reconnect: true}
		}
	}
}

// ackItem is a group of committed messages to acknowledge in order, or a
// request to reconnect once the acknowledgements before it are sent.
type ackItem struct {
	msgs      []paho.Message
	reconnect bool
}

// reconnect makes the broker redeliver messages that were left
// unacknowledged when the queue overflowed.
func (in *Ingester) reconnect() {
	in.connMu.Lock()
	defer in.connMu.Unlock()
	if in.closed {
		return
	}
	in.log.Warn("reconnecting to have the broker redeliver messages left unacknowledged on queue overflow")
	in.live.Store(false)
	in.obs.BrokerConnection(false, false)
	in.client.Disconnect(1000)
	in.client.Connect()
}

func (in *Ingester) ackLoop(acks <-chan ackItem) {
	for it := range acks {
		for _, m := range it.msgs {
			m.Ack()
		}
		if it.reconnect {
			in.reconnect()
		}
	}
}

// commitBatch writes one batch, retrying while the store fails, then
// queues the acknowledgements and runs the callbacks.
func (in *Ingester) commitBatch(batch []decodedMsg, acks chan<- ackItem) error {
	var b store.Batch
	var groupMsg []int // message index of each group
	for k, m := range batch {
		if len(m.readings) > 0 {
			b.Groups = append(b.Groups, store.Group{Structure: m.structure, Readings: m.readings})
			groupMsg = append(groupMsg, k)
		}
		b.DeadLetters = append(b.DeadLetters, m.dead...)
	}
	b.OnConflict = func(g int, cs []store.Conflict) store.DeadLetter {
		return in.conflictLetter(batch[groupMsg[g]], cs)
	}
	var res store.CommitResult
	var err error
	var applyFatigue func()
	if in.deps.Fatigue != nil {
		b.Fatigue = func(r store.CommitResult) ([]store.FatigueUpdate, error) {
			ups, apply, err := in.deps.Fatigue.Stage(b.Groups, r)
			applyFatigue = apply
			return ups, err
		}
	}
	deadline := time.Time{}
	for attempt := 0; ; attempt++ {
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		applyFatigue = nil
		res, err = in.deps.Store.Commit(ctx, b)
		cancel()
		if err == nil {
			in.commitFailing.Store(false)
			if applyFatigue != nil {
				applyFatigue()
			}
			break
		}
		in.obs.CommitFailed()
		in.failMu.Lock()
		if !in.commitFailing.Load() {
			in.failSince = time.Now()
		}
		in.failErr = err
		in.commitFailing.Store(true)
		in.failMu.Unlock()
		in.qmu.RLock()
		stopping := in.stopping
		in.qmu.RUnlock()
		if stopping {
			if deadline.IsZero() {
				deadline = time.Now().Add(in.cfg.ShutdownTimeout)
			}
			if time.Now().After(deadline) {
				return fmt.Errorf("ingest: commit of %d messages failed at shutdown; they stay unacknowledged and the broker redelivers them: %w", len(batch), err)
			}
		}
		in.limit.log(in.log, "commit_failed", "ingest: commit failed; retrying, nothing acknowledged", "messages", len(batch), "err", err)
		wait := min(time.Duration(1<<min(attempt, 6))*100*time.Millisecond, 5*time.Second)
		if stopping {
			// Not past the shutdown deadline.
			pause(min(wait, time.Until(deadline)), nil)
		} else {
			// The end of Run's context cuts the pause short: shutdown's
			// last attempts begin at once.
			pause(wait, in.done)
		}
	}
	ms := make([]paho.Message, len(batch))
	for i, m := range batch {
		ms[i] = m.raw
	}
	acks <- ackItem{msgs: ms}

	// Counting and callbacks after the commit.
	var stored, dups, conflictMsgs int64
	if res.DeadLettersDropped > 0 {
		in.obs.DeadLettersDropped(int(res.DeadLettersDropped))
		in.limit.log(in.log, "dead_letters_dropped", "ingest: oldest dead letters dropped to keep under the cap", "dropped", res.DeadLettersDropped)
	}
	g := 0
	last := map[string]time.Time{} // per message: each channel's latest new reading
	for _, m := range batch {
		outcome := OutcomeRejected
		if len(m.readings) > 0 {
			n := res.Inserted[g]
			newRs := m.readings
			if n < len(m.readings) {
				newRs = make([]store.Reading, 0, n)
				for i, r := range m.readings {
					if res.New[g][i] {
						newRs = append(newRs, r)
					}
				}
			}
			conflicts := res.Conflicts[g]
			g++
			d := len(m.readings) - n - len(conflicts)
			stored += int64(n)
			dups += int64(d)
			if n > 0 {
				outcome = OutcomeStored
				in.obs.ReadingsHandled(m.structure, OutcomeStored, n)
				clear(last)
				for _, r := range newRs {
					if r.Time.After(last[r.Channel]) {
						last[r.Channel] = r.Time
					}
				}
				for ch, t := range last {
					in.obs.LastReading(m.structure, ch, t)
				}
			} else {
				outcome = OutcomeDuplicate
			}
			if d > 0 {
				in.obs.ReadingsHandled(m.structure, OutcomeDuplicate, d)
			}
			if len(conflicts) > 0 {
				in.obs.ReadingsHandled(m.structure, OutcomeRejected, len(conflicts))
				in.obs.Rejected(m.structure, string(ReasonConflicting))
				conflictMsgs++
				if n == 0 && d == 0 {
					outcome = OutcomeRejected
				}
			}
			if n > 0 && in.deps.OnCommitted != nil {
				in.deps.OnCommitted(m.structure, newRs)
			}
		}
		if m.rejectedReadings > 0 {
			in.obs.ReadingsHandled(m.structure, OutcomeRejected, m.rejectedReadings)
		}
		for _, d := range m.dead {
			in.obs.Rejected(m.structure, d.Reason)
		}
		in.obs.MessageHandled(m.structure, outcome)
	}
	in.stats.Lock()
	in.stats.Messages += int64(len(batch))
	in.stats.Stored += stored
	in.stats.Duplicates += dups
	in.stats.Commits++
	for _, m := range batch {
		for _, d := range m.dead {
			in.stats.Rejected[d.Reason]++
		}
	}
	in.stats.Rejected[string(ReasonConflicting)] += conflictMsgs
	in.stats.Unlock()
	return nil
}

// pause waits d, or until done is closed (a nil done never is).
func pause(d time.Duration, done <-chan struct{}) {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
	case <-done:
	}
}

// conflictLetter is the dead letter of a message's readings whose key was
// already taken by another value.
func (in *Ingester) conflictLetter(m decodedMsg, cs []store.Conflict) store.DeadLetter {
	payload := m.raw.Payload()
	details := make([]string, 0, min(len(cs), 5))
	for _, c := range cs[:min(len(cs), 5)] {
		r := m.readings[c.Index]
		details = append(details, fmt.Sprintf("channel %q at %s: value %g, stored %g", r.Channel, r.Time.Format(time.RFC3339Nano), r.Value, c.Stored))
	}
	detail := fmt.Sprintf("topic %s: %d of %d readings conflict with a stored reading of the same channel and time (to %s): %s",
		m.raw.Topic(), len(cs), len(m.readings), TimeResolution, strings.Join(details, "; "))
	if len(cs) > 5 {
		detail += fmt.Sprintf("; and %d more", len(cs)-5)
	}
	in.limit.log(in.log, string(ReasonConflicting), "ingest: message rejected", "reason", string(ReasonConflicting), "topic", m.raw.Topic(), "detail", detail)
	return store.DeadLetter{Topic: m.raw.Topic(), Received: m.at, Reason: string(ReasonConflicting), Detail: detail,
		Payload: append([]byte(nil), payload[:min(len(payload), store.ExcerptBytes)]...), Size: len(payload)}
}

// decodedMsg is one message after decoding and validation.
type decodedMsg struct {
	raw              paho.Message
	at               time.Time // receiver clock at arrival
	structure        string
	readings         []store.Reading
	dead             []store.DeadLetter
	rejectedReadings int
}

// reasonOf is the reason code an error of the decoder or the registry
// carries (its Reason method), or fallback.
func reasonOf(err error, fallback Reason) Reason {
	var r interface{ Reason() string }
	if errors.As(err, &r) && r.Reason() != "" {
		return Reason(r.Reason())
	}
	return fallback
}

// limits are the Admit limits of this ingester.
func (in *Ingester) limits() Limits {
	return Limits{MaxAbsValue: in.cfg.MaxAbsValue, MaxAhead: max(in.cfg.MaxAhead, 0), MaxBehind: max(in.cfg.MaxBehind, 0)}
}

// relativeLimit is 2^28 s: RFC 8428 section 4.5.3 reads smaller times as
// relative to the receiver's clock.
const relativeLimit = 1 << 28

// decode turns one message into readings and dead letters. Packs are
// accepted per record: the records that pass Admit are stored, the others
// become one dead letter per reason (with the count and the first few
// records' details); the message is acknowledged either way.
func (in *Ingester) decode(r received) decodedMsg {
	m := r.msg
	topic := m.Topic()
	payload := m.Payload()
	out := decodedMsg{raw: m, at: r.at}
	reject := func(reason Reason, detail string, n int) {
		p := payload
		if len(p) > store.ExcerptBytes {
			p = p[:store.ExcerptBytes]
		}
		out.dead = append(out.dead, store.DeadLetter{Topic: topic, Received: r.at, Reason: string(reason), Detail: detail,
			Payload: append([]byte(nil), p...), Size: len(payload)})
		out.rejectedReadings += n
		in.limit.log(in.log, string(reason), "ingest: message rejected", "reason", string(reason), "topic", topic, "detail", detail)
	}

	structure, channel, err := in.parseTopic(topic)
	if err != nil {
		out.structure = UnknownStructureLabel
		reject(ReasonBadTopic, err.Error(), 0)
		return out
	}
	reg, ok := in.deps.Registries[structure]
	if !ok {
		// Counted under one label: a publisher must not create series.
		out.structure = UnknownStructureLabel
		reject(ReasonUnknownStructure, fmt.Sprintf("topic %s: structure %q is not configured; add its sensor map or fix the logger's topic", topic, structure), 0)
		return out
	}
	out.structure = structure
	if len(payload) > in.cfg.MaxPayload {
		reject(ReasonOversized, fmt.Sprintf("topic %s: payload of %d bytes exceeds max_payload %d; split the pack or raise the limit", topic, len(payload), in.cfg.MaxPayload), 0)
		return out
	}
	// With the receiver clock set to 2^28 s, a relative time (|t| < 2^28 s)
	// resolves below 2^29 s (1987), where no logger's absolute time lies.
	now := time.Unix(relativeLimit, 0).UTC()
	if in.cfg.AllowRelativeTime {
		now = r.at
	}
	recs, err := senml.Decode(payload, now)
	if err != nil {
		reject(reasonOf(err, "malformed_payload"), fmt.Sprintf("topic %s: %v", topic, err), 0)
		return out
	}
	if len(recs) == 0 {
		reject(ReasonEmptyPack, fmt.Sprintf("topic %s: SenML pack has no records", topic), 0)
		return out
	}
	byReason := map[Reason][]string{}
	var order []Reason
	bad := func(reason Reason, detail string) {
		if _, seen := byReason[reason]; !seen {
			order = append(order, reason)
		}
		byReason[reason] = append(byReason[reason], detail)
	}
	lim := in.limits()
	out.readings = make([]store.Reading, 0, len(recs))
	for i, rec := range recs {
		name := rec.Name
		switch {
		case channel != "" && name != "" && name != channel:
			bad(ReasonNameMismatch, fmt.Sprintf("record %d names channel %q but the topic is channel %q", i, name, channel))
			continue
		case channel != "":
			name = channel
		case name == "":
			bad(ReasonMissingName, fmt.Sprintf("record %d has no name; on topic %s every record must name its channel (n or bn+n)", i, topic))
			continue
		}
		if !in.cfg.AllowRelativeTime && rec.Time.Unix() < 2*relativeLimit {
			bad(ReasonRelativeTime, fmt.Sprintf("record %d (channel %q): time is relative to the receiver (below 2^28 s) or before 1987; the logger must send absolute times (bt/t, Unix seconds) so a redelivered reading is recognised", i, name))
			continue
		}
		rd, rej := Admit(lim, reg, name, rec.Unit, rec.Time, rec.Value, r.at)
		if rej != nil {
			bad(rej.Reason, fmt.Sprintf("record %d: %s", i, rej.Detail))
			continue
		}
		out.readings = append(out.readings, rd)
	}
	for _, reason := range order {
		ds := byReason[reason]
		detail := strings.Join(ds[:min(len(ds), 5)], "; ")
		if len(ds) > 5 {
			detail += fmt.Sprintf("; and %d more", len(ds)-5)
		}
		reject(reason, fmt.Sprintf("topic %s: %d of %d records rejected: %s", topic, len(ds), len(recs), detail), len(ds))
	}
	return out
}

// parseTopic splits prefix/structure[/channel].
func (in *Ingester) parseTopic(topic string) (structure, channel string, err error) {
	parts := strings.Split(topic, "/")
	if parts[0] != in.cfg.TopicPrefix || len(parts) < 2 || len(parts) > 3 {
		return "", "", fmt.Errorf("topic %q: want %s/<structure> or %s/<structure>/<channel>", topic, in.cfg.TopicPrefix, in.cfg.TopicPrefix)
	}
	structure = parts[1]
	if structure == "" {
		return "", "", fmt.Errorf("topic %q: empty structure level", topic)
	}
	if len(parts) == 3 {
		channel = parts[2]
		if channel == "" {
			return structure, "", fmt.Errorf("topic %q: empty channel level", topic)
		}
	}
	return structure, channel, nil
}

type nopObserver struct{}

func (nopObserver) MessageHandled(string, string)         {}
func (nopObserver) ReadingsHandled(string, string, int)   {}
func (nopObserver) Rejected(string, string)               {}
func (nopObserver) LastReading(string, string, time.Time) {}
func (nopObserver) BrokerDropped(int)                     {}
func (nopObserver) DeadLettersDropped(int)                {}
func (nopObserver) CommitFailed()                         {}
func (nopObserver) BrokerConnection(bool, bool)           {}

// reasonLog logs at most one line per reason per interval, with the count
// of lines suppressed since.
type reasonLog struct {
	every time.Duration
	mu    sync.Mutex
	last  map[string]time.Time
	quiet map[string]int
}

func newReasonLog(every time.Duration) *reasonLog {
	return &reasonLog{every: every, last: map[string]time.Time{}, quiet: map[string]int{}}
}

func (l *reasonLog) log(lg *slog.Logger, reason, msg string, args ...any) {
	l.mu.Lock()
	now := time.Now()
	if t, ok := l.last[reason]; ok && now.Sub(t) < l.every {
		l.quiet[reason]++
		l.mu.Unlock()
		return
	}
	l.last[reason] = now
	n := l.quiet[reason]
	l.quiet[reason] = 0
	l.mu.Unlock()
	if n > 0 {
		args = append(args, "suppressed_since_last", n)
	}
	lg.Warn(msg, args...)
}
