// Package broker runs the embedded MQTT broker (mochi-mqtt v2) used by the
// self-contained mode of the monitor: one TCP listener on a loopback address,
// optional username/password authentication, and in-flight and queue limits
// raised so that QoS 1 messages to a slow subscriber are held, not dropped.
//
// Sessions and in-flight messages live in memory only: a restart of the
// embedded broker loses what it had not delivered yet. For a logger on site
// use a broker with persistence (see deploy/mosquitto).
package broker

import (
	"context"
	"crypto/sha256"
	"crypto/subtle"
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	mqtt "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/listeners"
	"github.com/mochi-mqtt/server/v2/packets"
)

// Config configures the embedded broker.
type Config struct {
	// Address is the TCP address to listen on, e.g. "127.0.0.1:1883";
	// port 0 picks a free port (see Broker.Addr).
	Address string
	// Users maps user names to passwords. When empty, AllowAnonymous must
	// be set explicitly.
	Users map[string]string
	// AllowAnonymous accepts clients without credentials. Only for a
	// broker bound to loopback in demo and test runs.
	AllowAnonymous bool
	// TLS, when set, makes the listener speak TLS.
	TLS *tls.Config
	// MaxInflight is the per-client number of QoS 1/2 messages sent but
	// not yet acknowledged; more are dropped (counted in Dropped). Zero
	// means 65535, the protocol's packet-id limit.
	MaxInflight uint16
	// MaxPendingWrites is the per-client queue of packets waiting for the
	// socket; more are dropped (counted in Dropped). Zero means 65536.
	MaxPendingWrites int32
	// Logger receives the broker's warnings and errors (lower levels are
	// discarded; repeated messages at most once per LogEvery). Nil
	// discards everything.
	Logger *slog.Logger
	// LogEvery bounds repeated log messages. Zero means 10 s.
	LogEvery time.Duration
}

// Broker is a running embedded broker.
type Broker struct {
	srv  *mqtt.Server
	addr string
	once sync.Once
}

// Start starts the broker and returns once it listens.
func Start(cfg Config) (*Broker, error) {
	if cfg.Address == "" {
		return nil, errors.New("broker: empty listen address; give host:port, e.g. 127.0.0.1:1883")
	}
	if len(cfg.Users) == 0 && !cfg.AllowAnonymous {
		return nil, errors.New("broker: no users configured and anonymous access not allowed; add users (name and password) or set AllowAnonymous for a loopback demo")
	}
	for u, p := range cfg.Users {
		if u == "" || p == "" {
			return nil, fmt.Errorf("broker: user %q: empty user name or password", u)
		}
	}
	if cfg.MaxInflight == 0 {
		cfg.MaxInflight = 65535
	}
	if cfg.MaxPendingWrites <= 0 {
		cfg.MaxPendingWrites = 65536
	}
	if cfg.LogEvery <= 0 {
		cfg.LogEvery = 10 * time.Second
	}
	caps := mqtt.NewDefaultServerCapabilities()
	caps.MaximumInflight = cfg.MaxInflight
	caps.ReceiveMaximum = cfg.MaxInflight
	caps.MaximumClientWritesPending = cfg.MaxPendingWrites
	var h slog.Handler = discardHandler{}
	if cfg.Logger != nil {
		h = &quietHandler{next: cfg.Logger.Handler(), every: cfg.LogEvery, last: &sync.Map{}}
	}
	srv := mqtt.New(&mqtt.Options{
		Capabilities: caps,
		Logger:       slog.New(h).With("component", "embedded-broker"),
		// Fewer $SYS updates: nobody reads them here.
		SysTopicResendInterval: 3600,
	})
	auth := &passwordHook{anonymous: cfg.AllowAnonymous, users: map[string][32]byte{}}
	for u, p := range cfg.Users {
		auth.users[u] = sha256.Sum256([]byte(p))
	}
	if err := srv.AddHook(auth, nil); err != nil {
		return nil, fmt.Errorf("broker: auth hook: %w", err)
	}
	if err := srv.AddHook(new(takeoverGuard), nil); err != nil {
		return nil, fmt.Errorf("broker: takeover guard hook: %w", err)
	}
	l := listeners.NewTCP(listeners.Config{ID: "tcp", Address: cfg.Address, TLSConfig: cfg.TLS})
	if err := srv.AddListener(l); err != nil {
		return nil, fmt.Errorf("broker: listen on %s: %w", cfg.Address, err)
	}
	b := &Broker{srv: srv, addr: l.Address()}
	if _, _, err := net.SplitHostPort(b.addr); err != nil {
		srv.Close()
		return nil, fmt.Errorf("broker: listener address %q: %w", b.addr, err)
	}
	// Serve starts the listener goroutines and returns.
	if err := srv.Serve(); err != nil {
		srv.Close()
		return nil, fmt.Errorf("broker: serve on %s: %w", b.addr, err)
	}
	return b, nil
}

// Addr returns the address the broker listens on (host:port, with the
// actual port when the configured port was 0).
func (b *Broker) Addr() string { return b.addr }

// Dropped returns how many QoS > 0 messages the broker dropped because a
// client's in-flight window or write queue was full. It should stay 0; a
// rising count means readings were lost before reaching the monitor.
func (b *Broker) Dropped() int64 {
	return atomic.LoadInt64(&b.srv.Info.InflightDropped) + atomic.LoadInt64(&b.srv.Info.MessagesDropped)
}

// Clients returns the number of connected clients.
func (b *Broker) Clients() int64 {
	return atomic.LoadInt64(&b.srv.Info.ClientsConnected)
}

// Close stops the listener and disconnects every client.
func (b *Broker) Close() error {
	var err error
	b.once.Do(func() { err = b.srv.Close() })
	return err
}

// passwordHook authenticates clients against a fixed user table. It is
// used instead of mochi's auth ledger, whose rules treat a trailing "*" in a
// password or user name as a wildcard, an empty rule value as "match
// anything", and compare passwords as plain strings: here names match
// exactly and passwords are compared as SHA-256 digests in constant time.
type passwordHook struct {
	mqtt.HookBase
	anonymous bool
	users     map[string][32]byte
}

func (h *passwordHook) ID() string { return "trussmonitor-password" }

func (h *passwordHook) Provides(b byte) bool {
	return b == mqtt.OnConnectAuthenticate || b == mqtt.OnACLCheck
}

func (h *passwordHook) OnConnectAuthenticate(cl *mqtt.Client, pk packets.Packet) bool {
	user := string(pk.Connect.Username)
	if user == "" && len(pk.Connect.Password) == 0 {
		return h.anonymous
	}
	want, ok := h.users[user]
	got := sha256.Sum256(pk.Connect.Password)
	// Compare even for unknown users so timing does not reveal names.
	eq := subtle.ConstantTimeCompare(want[:], got[:]) == 1
	return ok && eq
}

func (h *passwordHook) OnACLCheck(cl *mqtt.Client, topic string, write bool) bool {
	return true // every authenticated client may publish and subscribe
}

// discardHandler drops every record.
type discardHandler struct{}

func (discardHandler) Enabled(context.Context, slog.Level) bool  { return false }
func (discardHandler) Handle(context.Context, slog.Record) error { return nil }
func (d discardHandler) WithAttrs([]slog.Attr) slog.Handler      { return d }
func (d discardHandler) WithGroup(string) slog.Handler           { return d }

// quietHandler passes warnings and errors on, each distinct message at
// most once per interval (the broker logs one line per dropped message).
type quietHandler struct {
	next  slog.Handler
	every time.Duration
	last  *sync.Map // message -> time.Time of the last one passed on
}

func (q *quietHandler) Enabled(ctx context.Context, l slog.Level) bool {
	return l >= slog.LevelWarn && q.next.Enabled(ctx, l)
}

// closedConnection is the text of net.ErrClosed, which the broker's
// listener reports (with an empty message) for a client connection that the
// broker itself closed, as every connection is at shutdown.
const closedConnection = "use of closed network connection"

func (q *quietHandler) Handle(ctx context.Context, r slog.Record) error {
	if r.Message == "" {
		// mochi's listeners log a client connection's end as Warn("",
		// "error", err): drop the broker's own closing of it, and give
		// the others a message that says what they are.
		closed := false
		r.Attrs(func(a slog.Attr) bool {
			if a.Key == "error" && strings.Contains(a.Value.String(), closedConnection) {
				closed = true
			}
			return true
		})
		if closed {
			return nil
		}
		nr := slog.NewRecord(r.Time, r.Level, "embedded broker: client connection ended with an error", r.PC)
		r.Attrs(func(a slog.Attr) bool { nr.AddAttrs(a); return true })
		r = nr
	}
	now := time.Now()
	if v, ok := q.last.Load(r.Message); ok && now.Sub(v.(time.Time)) < q.every {
		return nil
	}
	q.last.Store(r.Message, now)
	return q.next.Handle(ctx, r)
}

func (q *quietHandler) WithAttrs(as []slog.Attr) slog.Handler {
	return &quietHandler{next: q.next.WithAttrs(as), every: q.every, last: q.last}
}

func (q *quietHandler) WithGroup(n string) slog.Handler {
	return &quietHandler{next: q.next.WithGroup(n), every: q.every, last: q.last}
}

// takeoverGuard works around a message loss in mochi v2.7.9's session
// takeover (Server.inheritClientSession): when a client reconnects to a
// persistent session, mochi copies the old session's in-flight messages to
// the new client and later clears the old client's, while other clients'
// publishes can still be routed to the old client in between. Messages
// published in that window were lost (measured: 3 to 86 of 12,000 in a
// kill-and-restart test). The guard makes a takeover exclusive: each publish
// holds a read lock from OnPublish to OnPublished, and a connecting client
// holds the write lock from OnSessionEstablish until its session is
// established (or it closes, or 5 s pass).
type takeoverGuard struct {
	mqtt.HookBase
	mu sync.RWMutex

	pubs     sync.Map // *mqtt.Client -> struct{}: publishers holding a read lock
	sessions sync.Map // *mqtt.Client -> chan struct{}: connecting clients holding the write lock
}

func (g *takeoverGuard) ID() string { return "trussmonitor-takeover-guard" }

func (g *takeoverGuard) Provides(b byte) bool {
	switch b {
	case mqtt.OnPublish, mqtt.OnPublished, mqtt.OnSessionEstablish, mqtt.OnSessionEstablished, mqtt.OnDisconnect:
		return true
	}
	return false
}

func (g *takeoverGuard) OnPublish(cl *mqtt.Client, pk packets.Packet) (packets.Packet, error) {
	if cl.Net.Inline {
		return pk, nil
	}
	g.mu.RLock()
	g.pubs.Store(cl, struct{}{})
	return pk, nil
}

func (g *takeoverGuard) releasePublish(cl *mqtt.Client) {
	if _, held := g.pubs.LoadAndDelete(cl); held {
		g.mu.RUnlock()
	}
}

func (g *takeoverGuard) OnPublished(cl *mqtt.Client, pk packets.Packet) { g.releasePublish(cl) }

func (g *takeoverGuard) OnSessionEstablish(cl *mqtt.Client, pk packets.Packet) {
	g.mu.Lock()
	done := make(chan struct{})
	g.sessions.Store(cl, done)
	go func() {
		t := time.NewTicker(10 * time.Millisecond)
		defer t.Stop()
		limit := time.After(5 * time.Second)
	wait:
		for {
			select {
			case <-done:
				break wait
			case <-limit:
				break wait
			case <-t.C:
				if cl.Closed() {
					break wait
				}
			}
		}
		g.sessions.Delete(cl)
		g.mu.Unlock()
	}()
}

func (g *takeoverGuard) endSession(cl *mqtt.Client) {
	if v, ok := g.sessions.Load(cl); ok {
		select {
		case <-v.(chan struct{}):
		default:
			close(v.(chan struct{}))
		}
	}
}

func (g *takeoverGuard) OnSessionEstablished(cl *mqtt.Client, pk packets.Packet) { g.endSession(cl) }

func (g *takeoverGuard) OnDisconnect(cl *mqtt.Client, err error, expire bool) {
	// A publish whose PUBACK could not be written never reaches OnPublished.
	g.releasePublish(cl)
}
