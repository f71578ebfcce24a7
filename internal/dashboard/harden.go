package dashboard

import (
	"fmt"
	"net/http"
	"strings"
)

// Content security policies. Both forbid framing by any page
// (frame-ancestors 'none'), so the dashboard cannot be overlaid by a hostile
// site (click-jacking); X-Frame-Options DENY says the same to older browsers.
const (
	// pageCSP is the policy of the dashboard page and its files: only the
	// page's own scripts, styles and API.
	pageCSP = "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; connect-src 'self'; frame-ancestors 'none'"
	// apiCSP is the policy of every other answer (JSON, metrics, errors):
	// nothing may load or frame it.
	apiCSP = "default-src 'none'; frame-ancestors 'none'"
)

// Harden wraps the service's whole HTTP handler (the API, the dashboard
// page, /metrics, /healthz and /readyz): every answer carries the
// anti-framing headers and nosniff, and a 404 or 405 that the wrapped
// handler answered in plain text (the page's file server, the router's
// "method not allowed") is answered in JSON instead, {"error": "..."} like
// the API's own errors, with no part of the request echoed back.
func Harden(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		hd := w.Header()
		hd.Set("X-Frame-Options", "DENY")
		hd.Set("X-Content-Type-Options", "nosniff")
		hd.Set("Content-Security-Policy", apiCSP)
		h.ServeHTTP(&jsonErrors{ResponseWriter: w}, r)
	})
}

// jsonErrors replaces plain-text 404 and 405 answers with JSON ones.
type jsonErrors struct {
	http.ResponseWriter
	wrote   bool // header written
	swallow bool // the wrapped handler's body is replaced
}

func (j *jsonErrors) WriteHeader(code int) {
	if j.wrote {
		return
	}
	j.wrote = true
	if (code == http.StatusNotFound || code == http.StatusMethodNotAllowed) &&
		!strings.HasPrefix(j.Header().Get("Content-Type"), "application/json") {
		j.swallow = true
		j.Header().Del("Content-Length")
		msg := "no page or API endpoint at this path; see docs/api.md for the endpoints"
		if code == http.StatusMethodNotAllowed {
			msg = fmt.Sprintf("method not allowed at this path; allowed: %s (the API is read-only)", j.Header().Get("Allow"))
		}
		writeError(j.ResponseWriter, code, msg)
		return
	}
	j.ResponseWriter.WriteHeader(code)
}

func (j *jsonErrors) Write(b []byte) (int, error) {
	if !j.wrote {
		j.WriteHeader(http.StatusOK)
	}
	if j.swallow {
		return len(b), nil
	}
	return j.ResponseWriter.Write(b)
}

// Unwrap gives http.ResponseController the underlying writer.
func (j *jsonErrors) Unwrap() http.ResponseWriter { return j.ResponseWriter }
