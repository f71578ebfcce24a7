package dashboard

import (
	"context"
	"fmt"
	"net/http"
	"strconv"
	"strings"
	"time"
)

// DeadLetter is one stored dead letter as the API lists it.
type DeadLetter struct {
	Received     time.Time // first receipt, receiver clock
	LastReceived time.Time // latest repeat
	Repeats      int64     // receipts folded into this entry
	Topic        string
	Reason       string
	Detail       string
	Size         int    // payload bytes received
	Excerpt      []byte // the payload's first bytes (at most 1 KiB)
}

// DeadLetterSource lists dead letters first received in [from, to), with
// reason when not empty, oldest first, at most limit. ctx is the request's
// context (a store query ends with it).
type DeadLetterSource interface {
	DeadLetters(ctx context.Context, from, to time.Time, reason string, limit int) ([]DeadLetter, error)
}

// Dead-letter listing bounds.
const (
	deadLetterWindow       = 24 * time.Hour // default period without from
	deadLetterLimit        = 1000           // default entries
	deadLetterLimitMaximum = 10000
)

type deadLetterJSON struct {
	Received     string `json:"received"`
	LastReceived string `json:"last_received"`
	Repeats      int64  `json:"repeats"`
	Topic        string `json:"topic"`
	Reason       string `json:"reason"`
	Detail       string `json:"detail"`
	PayloadBytes int    `json:"payload_bytes"`
	Excerpt      string `json:"excerpt"`
}

type deadLettersJSON struct {
	From        string           `json:"from"`
	To          string           `json:"to"`
	Reason      string           `json:"reason,omitempty"`
	Limit       int              `json:"limit"`
	Truncated   bool             `json:"truncated"`
	DeadLetters []deadLetterJSON `json:"dead_letters"`
}

// deadLetters serves GET /api/dead-letters?from=&to=&reason=&limit=
// (read-only): the dead letters of the period, default the last 24 hours,
// at most limit (default 1000, at most 10000).
func (h *Handler) deadLetters(w http.ResponseWriter, r *http.Request) {
	if h.opts.DeadLetters == nil {
		writeError(w, http.StatusNotFound, "this server has no dead-letter store")
		return
	}
	q := r.URL.Query()
	to := h.opts.Now()
	if v := q.Get("to"); v != "" {
		t, err := parseTime("to", v)
		if err != nil {
			writeError(w, http.StatusBadRequest, err.Error())
			return
		}
		to = t
	}
	from := to.Add(-deadLetterWindow)
	if v := q.Get("from"); v != "" {
		t, err := parseTime("from", v)
		if err != nil {
			writeError(w, http.StatusBadRequest, err.Error())
			return
		}
		from = t
	}
	if !to.After(from) {
		writeError(w, http.StatusBadRequest, fmt.Sprintf("to %s is not after from %s", timeText(to), timeText(from)))
		return
	}
	limit := deadLetterLimit
	if v := q.Get("limit"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 || n > deadLetterLimitMaximum {
			writeError(w, http.StatusBadRequest, fmt.Sprintf("query parameter limit: %q; give a whole number from 1 to %d", v, deadLetterLimitMaximum))
			return
		}
		limit = n
	}
	reason := q.Get("reason")
	ds, err := h.opts.DeadLetters.DeadLetters(r.Context(), from, to, reason, limit+1)
	if err != nil {
		writeSourceError(w, "dead letters", err)
		return
	}
	out := deadLettersJSON{From: timeText(from), To: timeText(to), Reason: reason, Limit: limit, DeadLetters: make([]deadLetterJSON, 0, len(ds))}
	if len(ds) > limit {
		ds, out.Truncated = ds[:limit], true
	}
	for _, d := range ds {
		out.DeadLetters = append(out.DeadLetters, deadLetterJSON{
			Received: timeText(d.Received), LastReceived: timeText(d.LastReceived), Repeats: d.Repeats,
			Topic: d.Topic, Reason: d.Reason, Detail: d.Detail, PayloadBytes: d.Size,
			Excerpt: strings.ToValidUTF8(string(d.Excerpt), "\uFFFD"),
		})
	}
	writeJSON(w, http.StatusOK, out)
}
