package service

import (
	"log/slog"
	"net"
	"net/http"
	"time"
)

// DefaultHTTPIdleTimeout closes a keep-alive connection that sent no
// request for this long, so idle clients cannot hold connections (and
// file descriptors) open without end.
const DefaultHTTPIdleTimeout = 60 * time.Second

// newHTTPServer returns the server of the metrics, health, API and
// dashboard handler h: headers must arrive within 10 s, and an idle
// keep-alive connection is closed after idle.
func newHTTPServer(h http.Handler, idle time.Duration) *http.Server {
	if idle <= 0 {
		idle = DefaultHTTPIdleTimeout
	}
	return &http.Server{Handler: h, ReadHeaderTimeout: 10 * time.Second, IdleTimeout: idle}
}

// exposed reports whether a listening address accepts connections from
// other hosts: any address but a loopback one (0.0.0.0 and :: listen on
// every interface).
func exposed(addr net.Addr) bool {
	tcp, ok := addr.(*net.TCPAddr)
	if !ok {
		return true
	}
	return !tcp.IP.IsLoopback()
}

// warnExposed logs a warning when the HTTP server listens beyond loopback:
// the API, dashboard and metrics have no authentication of their own.
func warnExposed(log *slog.Logger, file string, addr net.Addr) {
	if exposed(addr) {
		log.Warn("the HTTP server (API, dashboard, metrics; no authentication) listens on a non-loopback address; keep http.listen on 127.0.0.1 and reach it through an SSH tunnel or an authenticating reverse proxy",
			"address", addr.String(), "config", file)
	}
}
