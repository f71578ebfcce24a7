package dashboard

import (
	"encoding/json"
	"net/http/httptest"
	"strings"
	"testing"
)

// TestHardening: every answer forbids framing (CSP frame-ancestors 'none'
// and X-Frame-Options DENY, against click-jacking), 404 and 405 answer in
// JSON like the rest of the API, and nothing of a request's path or query
// is echoed back (a 100 kB id came back in the body before).
func TestHardening(t *testing.T) {
	_, inner := fixture(t)
	h := Harden(inner)
	long := strings.Repeat("x", 100_000)
	for _, c := range []struct {
		method, url string
		status      int
	}{
		{"GET", "/", 200},
		{"GET", "/api/structures", 200},
		{"GET", "/api/structures/alder-creek/state", 200},
		{"GET", "/no-such-page.html", 404},
		{"GET", "/api/nothing", 404},
		{"POST", "/api/structures/alder-creek/state", 405},
		{"DELETE", "/", 405},
		{"GET", "/api/structures/" + long + "/state", 404},
		{"GET", "/api/structures/alder-creek/members/" + long + "/series", 404},
		{"GET", "/api/structures/alder-creek/members/D2/series?from=" + long, 400},
		{"GET", "/api/structures/alder-creek/events?to=" + long, 400},
		{"GET", "/api/" + long, 404},
		{"GET", "/" + long, 404},
	} {
		name := c.method + " " + c.url
		if len(name) > 60 {
			name = name[:60] + "..."
		}
		t.Run(name, func(t *testing.T) {
			rec := httptest.NewRecorder()
			h.ServeHTTP(rec, httptest.NewRequest(c.method, c.url, nil))
			if rec.Code != c.status {
				t.Fatalf("status %d, want %d; body %.200s", rec.Code, c.status, rec.Body.String())
			}
			hdr := rec.Result().Header
			if got := hdr.Get("X-Frame-Options"); got != "DENY" {
				t.Errorf("X-Frame-Options %q, want DENY", got)
			}
			if csp := hdr.Get("Content-Security-Policy"); !strings.Contains(csp, "frame-ancestors 'none'") {
				t.Errorf("Content-Security-Policy %q lacks frame-ancestors 'none'", csp)
			}
			if c.status == 200 {
				return
			}
			if ct := hdr.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
				t.Errorf("Content-Type %q, want application/json", ct)
			}
			var e errorJSON
			if err := json.Unmarshal(rec.Body.Bytes(), &e); err != nil || e.Error == "" {
				t.Errorf("body is not a JSON error (%v): %.200s", err, rec.Body.String())
			}
			if strings.Contains(rec.Body.String(), "xxxxxxxx") {
				t.Errorf("the request's id is echoed back (%d bytes of body)", rec.Body.Len())
			}
			if c.status == 405 && hdr.Get("Allow") == "" {
				t.Error("405 without an Allow header")
			}
		})
	}
}
