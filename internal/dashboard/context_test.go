package dashboard

import (
	"context"
	"net/http"
	"net/http/httptest"
	"testing"
	"time"
)

// requestKey marks a request's context in TestRequestContextReachesSources.
type requestKey struct{}

// ctxSource is the in-memory source that notes the context its
// store-backed methods are called with.
type ctxSource struct {
	*memSource
	events, deadLetters any
}

func (s *ctxSource) Events(ctx context.Context, structure string, from, to time.Time) ([]Event, error) {
	s.events = ctx.Value(requestKey{})
	return s.memSource.Events(ctx, structure, from, to)
}

func (s *ctxSource) DeadLetters(ctx context.Context, from, to time.Time, reason string, limit int) ([]DeadLetter, error) {
	s.deadLetters = ctx.Value(requestKey{})
	return nil, nil
}

// TestRequestContextReachesSources: the sources that read the store
// (events, dead letters) are called with the request's context, so that a
// client that goes away, or the server's shutdown, ends their queries.
// Before, the service's sources queried with context.Background.
func TestRequestContextReachesSources(t *testing.T) {
	src := &ctxSource{memSource: newMemSource()}
	h := New(src, Options{DeadLetters: src})
	for _, path := range []string{"/api/structures/alder-creek/events", "/api/dead-letters"} {
		req := httptest.NewRequest(http.MethodGet, path, nil)
		req = req.WithContext(context.WithValue(req.Context(), requestKey{}, path))
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, req)
		if rec.Code != http.StatusOK {
			t.Fatalf("GET %s: %d %s", path, rec.Code, rec.Body)
		}
	}
	if src.events != "/api/structures/alder-creek/events" {
		t.Errorf("events source called with context value %v, want the request's", src.events)
	}
	if src.deadLetters != "/api/dead-letters" {
		t.Errorf("dead-letter source called with context value %v, want the request's", src.deadLetters)
	}
}
