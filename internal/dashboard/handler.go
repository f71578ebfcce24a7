package dashboard

import (
	"embed"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"net/http"
	"slices"
	"strings"
	"time"
)

//go:embed static
var staticFiles embed.FS

// Options tune the handler. The zero value is usable.
type Options struct {
	// Now returns the current time; it defaults to time.Now. It sets the
	// default end of a series or events query.
	Now func() time.Time
	// DefaultWindow is the length of a series or events query that gives no
	// from; it defaults to 15 minutes.
	DefaultWindow time.Duration
	// MaxSeriesPoints caps the points of one series answer; longer series
	// are reduced by keeping, per bucket of consecutive epochs, the epoch
	// with the largest |w| (so no excursion is hidden). Defaults to 2000.
	MaxSeriesPoints int
	// ClockNote, when set, is returned with every state (clock_note) and
	// shown beside the epoch time, e.g. "simulated time, 20x real time".
	ClockNote string
	// DeadLetters lists the stored dead letters for GET /api/dead-letters
	// (read-only); nil answers that endpoint with 404.
	DeadLetters DeadLetterSource
	// Fatigue, when set, feeds the fatigue panel; without it the fatigue
	// endpoint lists no gauges.
	Fatigue FatigueSource
}

// Handler serves the JSON API under /api/ and the dashboard page at /.
type Handler struct {
	src  Source
	opts Options
	mux  *http.ServeMux
}

// New returns the dashboard handler reading from src.
func New(src Source, opts Options) *Handler {
	if opts.Now == nil {
		opts.Now = time.Now
	}
	if opts.DefaultWindow <= 0 {
		opts.DefaultWindow = 15 * time.Minute
	}
	if opts.MaxSeriesPoints <= 0 {
		opts.MaxSeriesPoints = 2000
	}
	h := &Handler{src: src, opts: opts, mux: http.NewServeMux()}
	h.mux.HandleFunc("GET /api/structures", h.structures)
	h.mux.HandleFunc("GET /api/structures/{name}/state", h.state)
	h.mux.HandleFunc("GET /api/structures/{name}/members/{id}/series", h.series)
	h.mux.HandleFunc("GET /api/structures/{name}/events", h.events)
	h.mux.HandleFunc("GET /api/dead-letters", h.deadLetters)
	h.mux.HandleFunc("GET /api/structures/{name}/fatigue", h.fatigueHandler)
	h.mux.HandleFunc("GET /api/", func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, "no API endpoint at this path; see docs/api.md for the endpoints")
	})
	sub, err := fs.Sub(staticFiles, "static")
	if err != nil {
		// The embedded tree is fixed at build time; a failure here is a
		// build defect, reported on every page request rather than a panic.
		h.mux.HandleFunc("/", func(w http.ResponseWriter, _ *http.Request) {
			http.Error(w, "dashboard page missing from the build: "+err.Error(), http.StatusInternalServerError)
		})
		return h
	}
	files := http.FileServerFS(sub)
	h.mux.Handle("GET /", http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Cache-Control", "no-cache")
		w.Header().Set("X-Content-Type-Options", "nosniff")
		w.Header().Set("X-Frame-Options", "DENY")
		w.Header().Set("Content-Security-Policy", pageCSP)
		files.ServeHTTP(w, r)
	}))
	return h
}

// ServeHTTP implements http.Handler.
func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) { h.mux.ServeHTTP(w, r) }

func (h *Handler) structures(w http.ResponseWriter, _ *http.Request) {
	names := h.src.Structures()
	if names == nil {
		names = []string{}
	}
	writeJSON(w, http.StatusOK, structuresJSON{Structures: names})
}

// knownStructure answers 404 and returns false when name is not monitored.
func (h *Handler) knownStructure(w http.ResponseWriter, name string) bool {
	names := h.src.Structures()
	if slices.Contains(names, name) {
		return true
	}
	// The requested name is not echoed back: it is the caller's text, of
	// any length.
	writeError(w, http.StatusNotFound, fmt.Sprintf("unknown structure; known structures: %s", strings.Join(names, ", ")))
	return false
}

func (h *Handler) state(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	if !h.knownStructure(w, name) {
		return
	}
	s, err := h.src.State(name)
	if err != nil {
		writeSourceError(w, fmt.Sprintf("state of structure %q", name), err)
		return
	}
	out := toStateJSON(s)
	out.ClockNote = h.opts.ClockNote
	writeJSON(w, http.StatusOK, out)
}

func (h *Handler) series(w http.ResponseWriter, r *http.Request) {
	name, id := r.PathValue("name"), r.PathValue("id")
	if !h.knownStructure(w, name) {
		return
	}
	from, to, ok := h.timeRange(w, r)
	if !ok {
		return
	}
	s, err := h.src.State(name)
	if err != nil {
		writeSourceError(w, fmt.Sprintf("state of structure %q", name), err)
		return
	}
	i := slices.IndexFunc(s.Geometry.Members, func(m Member) bool { return m.ID == id })
	if i < 0 {
		writeError(w, http.StatusNotFound, fmt.Sprintf("structure %q has no member with the requested id", name))
		return
	}
	if !s.Geometry.Members[i].Gauged {
		writeError(w, http.StatusNotFound, fmt.Sprintf("member %q of structure %q carries no gauge; only gauged members have a series", id, name))
		return
	}
	ser, err := h.src.Series(name, id, from, to)
	if err != nil {
		writeSourceError(w, fmt.Sprintf("series of member %q of structure %q", id, name), err)
		return
	}
	k := ser.CriticalValue
	if k == 0 {
		k = s.CriticalValue
	}
	pts := reduceSeries(ser.Points, h.opts.MaxSeriesPoints)
	out := seriesJSON{
		Structure: name, Member: id, From: timeText(from), To: timeText(to),
		CriticalValue: n(k), Total: len(ser.Points), Points: make([]seriesPointJSON, 0, len(pts)),
	}
	for _, p := range pts {
		out.Points = append(out.Points, toSeriesPointJSON(p, k))
	}
	writeJSON(w, http.StatusOK, out)
}

func (h *Handler) events(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	if !h.knownStructure(w, name) {
		return
	}
	from, to, ok := h.timeRange(w, r)
	if !ok {
		return
	}
	evs, err := h.src.Events(r.Context(), name, from, to)
	if err != nil {
		writeSourceError(w, fmt.Sprintf("events of structure %q", name), err)
		return
	}
	out := eventsJSON{Structure: name, From: timeText(from), To: timeText(to), Events: make([]eventJSON, 0, len(evs))}
	for _, e := range evs {
		out.Events = append(out.Events, toEventJSON(e))
	}
	writeJSON(w, http.StatusOK, out)
}

// timeRange reads the from and to query parameters (RFC 3339). A missing
// to is now; a missing from is DefaultWindow before to. On a bad value it
// answers 400 and returns ok false.
func (h *Handler) timeRange(w http.ResponseWriter, r *http.Request) (from, to time.Time, ok bool) {
	q := r.URL.Query()
	to = h.opts.Now()
	if v := q.Get("to"); v != "" {
		t, err := parseTime("to", v)
		if err != nil {
			writeError(w, http.StatusBadRequest, err.Error())
			return from, to, false
		}
		to = t
	}
	from = to.Add(-h.opts.DefaultWindow)
	if v := q.Get("from"); v != "" {
		t, err := parseTime("from", v)
		if err != nil {
			writeError(w, http.StatusBadRequest, err.Error())
			return from, to, false
		}
		from = t
	}
	if !from.Before(to) {
		writeError(w, http.StatusBadRequest, fmt.Sprintf("query parameter from (%s) must be before to (%s)", timeText(from), timeText(to)))
		return from, to, false
	}
	return from, to, true
}

func parseTime(param, v string) (time.Time, error) {
	t, err := time.Parse(time.RFC3339Nano, v)
	if err != nil {
		return time.Time{}, fmt.Errorf("query parameter %s is not an RFC 3339 time; write for example 2026-12-02T01:30:00Z (a + in an offset must be sent as %%2B)", param)
	}
	return t, nil
}

// reduceSeries keeps at most max points: the series is cut into max
// buckets of consecutive epochs and each bucket keeps its point with the
// largest |w| (non-finite w counts as 0), so no excursion is hidden.
func reduceSeries(pts []SeriesPoint, max int) []SeriesPoint {
	if len(pts) <= max {
		return pts
	}
	out := make([]SeriesPoint, 0, max)
	for b := 0; b < max; b++ {
		lo, hi := b*len(pts)/max, (b+1)*len(pts)/max
		best := lo
		for i := lo + 1; i < hi; i++ {
			if absW(pts[i].W) > absW(pts[best].W) {
				best = i
			}
		}
		out = append(out, pts[best])
	}
	return out
}

func absW(w float64) float64 {
	if math.IsNaN(w) || math.IsInf(w, 0) {
		return 0
	}
	return math.Abs(w)
}

func writeSourceError(w http.ResponseWriter, what string, err error) {
	if errors.Is(err, ErrNotFound) {
		writeError(w, http.StatusNotFound, fmt.Sprintf("%s: %v", what, err))
		return
	}
	writeError(w, http.StatusInternalServerError, fmt.Sprintf("%s could not be read: %v", what, err))
}

func writeError(w http.ResponseWriter, status int, msg string) {
	writeJSON(w, status, errorJSON{Error: msg})
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		status = http.StatusInternalServerError
		b, _ = json.Marshal(errorJSON{Error: "encoding the answer failed: " + err.Error()})
	}
	w.Header().Set("Content-Type", "application/json; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Content-Type-Options", "nosniff")
	w.Header().Set("X-Frame-Options", "DENY")
	w.Header().Set("Content-Security-Policy", apiCSP)
	w.WriteHeader(status)
	_, _ = w.Write(append(b, '\n'))
}
