package dashboard

import (
	"encoding/json"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"testing"
	"time"
	"trussmonitor/internal/reconcile"
)

var t0 = time.Date(2026, 6, 14, 9, 0, 0, 0, time.UTC)

// fixture returns a handler over 60 one-second epochs of the footbridge with
// an alarm on D2 from epoch 50 on and one raised event.
func fixture(t testing.TB) (*memSource, http.Handler) {
	t.Helper()
	src := newMemSource()
	for i := 0; i < 60; i++ {
		shift := 0.0
		if i >= 50 {
			shift = 3000 // 5 sigma
		}
		src.addEpoch(t0.Add(time.Duration(i)*time.Second), "D2", shift)
	}
	src.addEvent(Event{
		Time: t0.Add(53 * time.Second), Rule: "member_residual", Subject: "D2", Kind: "raised",
		W: 5.3, Size: 3100, SizeUnit: "N", Message: "D2 strays from prediction",
		Causes: []reconcile.RankedCause{
			{Kind: reconcile.GaugeFault, Subject: "D2-a", T: 28.1, Size: 3100, Unit: "N"},
			{Kind: reconcile.StiffnessChange, Subject: "D2", T: 24.9, Size: -0.08, Unit: "1"},
			{Kind: reconcile.NodalLoad, Subject: "L2", T: 9.2, Size: 5200, Unit: "N"},
		},
	})
	h := New(src, Options{Now: func() time.Time { return t0.Add(60 * time.Second) }})
	return src, h
}

func get(t *testing.T, h http.Handler, url string) (int, string, http.Header) {
	t.Helper()
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest(http.MethodGet, url, nil))
	b, _ := io.ReadAll(rec.Result().Body)
	return rec.Code, string(b), rec.Result().Header
}

func TestEndpointsStatusAndErrors(t *testing.T) {
	_, h := fixture(t)
	cases := []struct {
		name   string
		url    string
		status int
		errHas string // substring of the "error" field, for non-200
	}{
		{"list", "/api/structures", 200, ""},
		{"state", "/api/structures/alder-creek/state", 200, ""},
		{"state unknown structure", "/api/structures/harbour-hall/state", 404, `unknown structure; known structures: alder-creek`},
		{"series default range", "/api/structures/alder-creek/members/D2/series", 200, ""},
		{"series explicit range", "/api/structures/alder-creek/members/D2/series?from=2026-06-14T09:00:10Z&to=2026-06-14T09:00:20Z", 200, ""},
		{"series offset time", "/api/structures/alder-creek/members/D2/series?from=2026-06-14T11:00:10%2B02:00", 200, ""},
		{"series unknown structure", "/api/structures/nowhere/members/D2/series", 404, `unknown structure`},
		{"series unknown member", "/api/structures/alder-creek/members/X9/series", 404, `has no member with the requested id`},
		{"series ungauged member", "/api/structures/alder-creek/members/B1/series", 404, "carries no gauge"},
		{"series bad from", "/api/structures/alder-creek/members/D2/series?from=yesterday", 400, `query parameter from is not an RFC 3339 time`},
		{"series bad to", "/api/structures/alder-creek/members/D2/series?to=2026-06-14", 400, `query parameter to is not an RFC 3339 time`},
		{"series from after to", "/api/structures/alder-creek/members/D2/series?from=2026-06-14T10:00:00Z&to=2026-06-14T09:00:00Z", 400, "must be before to"},
		{"events", "/api/structures/alder-creek/events", 200, ""},
		{"events unknown structure", "/api/structures/nowhere/events", 404, "unknown structure"},
		{"events bad from", "/api/structures/alder-creek/events?from=1718355600", 400, "query parameter from"},
		{"unknown api path", "/api/nothing", 404, "no API endpoint"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, body, hdr := get(t, h, c.url)
			if code != c.status {
				t.Fatalf("GET %s: status %d, want %d; body %s", c.url, code, c.status, body)
			}
			if ct := hdr.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
				t.Errorf("Content-Type %q, want application/json", ct)
			}
			if c.status == 200 {
				return
			}
			var e errorJSON
			if err := json.Unmarshal([]byte(body), &e); err != nil {
				t.Fatalf("error body is not JSON: %v: %s", err, body)
			}
			if !strings.Contains(e.Error, c.errHas) {
				t.Errorf("error %q does not contain %q", e.Error, c.errHas)
			}
		})
	}
}

func TestMethodNotAllowed(t *testing.T) {
	_, h := fixture(t)
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest(http.MethodPost, "/api/structures/alder-creek/state", strings.NewReader("{}")))
	if rec.Code != http.StatusMethodNotAllowed {
		t.Fatalf("POST state: status %d, want 405", rec.Code)
	}
}

func TestStructuresJSON(t *testing.T) {
	_, h := fixture(t)
	_, body, _ := get(t, h, "/api/structures")
	var got structuresJSON
	if err := json.Unmarshal([]byte(body), &got); err != nil {
		t.Fatal(err)
	}
	if len(got.Structures) != 1 || got.Structures[0] != "alder-creek" {
		t.Fatalf("structures %v", got.Structures)
	}
}

func TestStateJSON(t *testing.T) {
	_, h := fixture(t)
	_, body, _ := get(t, h, "/api/structures/alder-creek/state")
	// Shape: decode into a generic map to check the field names of the wire
	// format exactly as docs/api.md documents them.
	var raw map[string]any
	if err := json.Unmarshal([]byte(body), &raw); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"structure", "title", "model_version", "epoch", "critical_value", "geometry", "gauged", "fit", "loads", "members", "design", "caution"} {
		if _, ok := raw[key]; !ok {
			t.Errorf("state has no field %q", key)
		}
	}
	var st stateJSON
	if err := json.Unmarshal([]byte(body), &st); err != nil {
		t.Fatal(err)
	}
	if st.Epoch == nil || *st.Epoch != "2026-06-14T09:00:59Z" {
		t.Errorf("epoch %v, want 2026-06-14T09:00:59Z", st.Epoch)
	}
	if st.Geometry.Dimension != 2 || len(st.Geometry.Nodes) != 12 || len(st.Geometry.Members) != 22 {
		t.Errorf("geometry: dimension %d, %d nodes, %d members; want 2, 12, 22", st.Geometry.Dimension, len(st.Geometry.Nodes), len(st.Geometry.Members))
	}
	// Supports, load directions and the gauge-or-stiffness mark.
	if len(st.Geometry.Supports) != 2 || st.Geometry.Supports[0].Node != "L0" || strings.Join(st.Geometry.Supports[0].Fixed, " ") != "x y" ||
		strings.Join(st.Geometry.Supports[1].Fixed, " ") != "y" || strings.Join(st.Geometry.Supports[1].Spring, " ") != "x" {
		t.Errorf("supports %+v", st.Geometry.Supports)
	}
	if len(st.Geometry.Loads) != 10 || st.Geometry.Loads[0].Direction != [3]float64{0, -1, 0} || !st.Geometry.Loads[1].Unknown {
		t.Errorf("loads %+v", st.Geometry.Loads)
	}
	for _, m := range st.Geometry.Members {
		if m.GaugeOrStiffness != (m.ID == "D1") {
			t.Errorf("member %s gauge_or_stiffness %v", m.ID, m.GaugeOrStiffness)
		}
	}
	if !strings.Contains(st.Caution, "not a safety verdict") || !strings.Contains(st.Caution, "licensed engineer") {
		t.Errorf("caution %q lacks the safety text", st.Caution)
	}
	if !st.Fit.Rejected || st.Fit.DOF != 7 || *st.Fit.PValue != 6.9e-11 {
		t.Errorf("fit %+v", st.Fit)
	}
	byID := map[string]memberStateJSON{}
	for _, m := range st.Gauged {
		byID[m.ID] = m
	}
	d2 := byID["D2"]
	if !d2.Alarm || !d2.Checkable || d2.W == nil || *d2.W <= 3.29 {
		t.Errorf("D2 should be an active alarm with w > 3.29: %+v", d2)
	}
	// band = predicted -+ k sigma_residual, k = 3.29
	if lo, hi := *d2.Predicted-3.29*600, *d2.Predicted+3.29*600; *d2.BandLow != lo || *d2.BandHigh != hi {
		t.Errorf("band [%v, %v], want [%v, %v]", *d2.BandLow, *d2.BandHigh, lo, hi)
	}
	v3 := byID["V3"]
	if v3.Checkable || v3.W != nil || v3.MDB != nil {
		t.Errorf("V3 is not checkable: w and mdb must be null, got %+v", v3)
	}
	if !strings.Contains(body, `"w": null`) {
		t.Errorf("non-finite w is not written as null")
	}
	if len(st.Loads) != 1 || st.Loads[0].Pattern != "crowd" || *st.Loads[0].StdDev != 0.05 {
		t.Errorf("loads %+v", st.Loads)
	}
}

func TestStateBeforeFirstEpoch(t *testing.T) {
	h := New(newMemSource(), Options{})
	code, body, _ := get(t, h, "/api/structures/alder-creek/state")
	if code != 200 {
		t.Fatalf("status %d: %s", code, body)
	}
	var st stateJSON
	if err := json.Unmarshal([]byte(body), &st); err != nil {
		t.Fatal(err)
	}
	if st.Epoch != nil || st.Gauged == nil || len(st.Gauged) != 0 || st.Loads == nil {
		t.Errorf("before the first epoch: epoch %v (want null), gauged %v, loads %v (want [])", st.Epoch, st.Gauged, st.Loads)
	}
}

func TestSeriesJSON(t *testing.T) {
	_, h := fixture(t)
	_, body, _ := get(t, h, "/api/structures/alder-creek/members/D2/series?from=2026-06-14T09:00:45Z&to=2026-06-14T09:00:55Z")
	var s seriesJSON
	if err := json.Unmarshal([]byte(body), &s); err != nil {
		t.Fatal(err)
	}
	if s.Member != "D2" || s.Total != 10 || len(s.Points) != 10 {
		t.Fatalf("series %s: total %d, %d points; want D2, 10, 10", s.Member, s.Total, len(s.Points))
	}
	if s.Points[0].Time != "2026-06-14T09:00:45Z" || s.Points[9].Time != "2026-06-14T09:00:54Z" {
		t.Errorf("times %s .. %s", s.Points[0].Time, s.Points[9].Time)
	}
	if s.Points[4].Alarm || !s.Points[5].Alarm {
		t.Errorf("alarm should start at 09:00:50: %+v %+v", s.Points[4], s.Points[5])
	}
	p := s.Points[7]
	if *p.BandHigh-*p.Predicted != 3.29**p.SigmaResidual {
		t.Errorf("band high %v, predicted %v, sigma %v", *p.BandHigh, *p.Predicted, *p.SigmaResidual)
	}
	// default range: the last 15 minutes before Now = 09:01:00 hold all 60 epochs
	_, body, _ = get(t, h, "/api/structures/alder-creek/members/D2/series")
	if err := json.Unmarshal([]byte(body), &s); err != nil {
		t.Fatal(err)
	}
	if s.Total != 60 || s.To != "2026-06-14T09:01:00Z" || s.From != "2026-06-14T08:46:00Z" {
		t.Errorf("default range %s .. %s with %d points", s.From, s.To, s.Total)
	}
}

func TestSeriesReduction(t *testing.T) {
	src, _ := fixture(t)
	h := New(src, Options{MaxSeriesPoints: 7, Now: func() time.Time { return t0.Add(time.Minute) }})
	_, body, _ := get(t, h, "/api/structures/alder-creek/members/D2/series")
	var s seriesJSON
	if err := json.Unmarshal([]byte(body), &s); err != nil {
		t.Fatal(err)
	}
	if s.Total != 60 || len(s.Points) != 7 {
		t.Fatalf("total %d, %d points; want 60 and 7", s.Total, len(s.Points))
	}
	// the last bucket (epochs 51..59) is in alarm: the kept point must be too
	if !s.Points[6].Alarm || *s.Points[6].W < 3.29 {
		t.Errorf("reduction lost the excursion: %+v", s.Points[6])
	}
	for i := 1; i < len(s.Points); i++ {
		if s.Points[i].Time <= s.Points[i-1].Time {
			t.Errorf("reduced points out of order at %d", i)
		}
	}
}

func TestEventsJSON(t *testing.T) {
	_, h := fixture(t)
	_, body, _ := get(t, h, "/api/structures/alder-creek/events?from=2026-06-14T09:00:00Z&to=2026-06-14T09:01:00Z")
	var e eventsJSON
	if err := json.Unmarshal([]byte(body), &e); err != nil {
		t.Fatal(err)
	}
	if len(e.Events) != 1 {
		t.Fatalf("%d events, want 1", len(e.Events))
	}
	ev := e.Events[0]
	if ev.Kind != "raised" || ev.Subject != "D2" || len(ev.Causes) != 3 || ev.Causes[0].Kind != "gauge_fault" || *ev.Causes[1].Size != -0.08 {
		t.Errorf("event %+v", ev)
	}
	_, body, _ = get(t, h, "/api/structures/alder-creek/events?from=2026-06-14T09:00:54Z&to=2026-06-14T09:01:00Z")
	if err := json.Unmarshal([]byte(body), &e); err != nil {
		t.Fatal(err)
	}
	if e.Events == nil || len(e.Events) != 0 {
		t.Errorf("events after the event: %v, want []", e.Events)
	}
}

func TestPageServed(t *testing.T) {
	_, h := fixture(t)
	for _, c := range []struct{ path, ctype, has string }{
		{"/", "text/html", `id="caution"`},
		{"/app.js", "javascript", "data-member"},
		{"/style.css", "text/css", "#truss"},
	} {
		code, body, hdr := get(t, h, c.path)
		if code != 200 || !strings.Contains(hdr.Get("Content-Type"), c.ctype) || !strings.Contains(body, c.has) {
			t.Errorf("GET %s: status %d, type %q, contains %q: %v", c.path, code, hdr.Get("Content-Type"), c.has, strings.Contains(body, c.has))
		}
		for _, banned := range []string{"http://", "https://"} {
			if c.path != "/app.js" && strings.Contains(body, banned) {
				t.Errorf("%s refers to the network (%s)", c.path, banned)
			}
		}
	}
	// app.js may name the SVG namespace URI but must not load anything remote.
	_, js, _ := get(t, h, "/app.js")
	if strings.Count(js, "http://") != 1 || strings.Contains(js, "https://") {
		t.Errorf("app.js refers to the network beyond the SVG namespace")
	}
}

// FuzzTimeRange feeds arbitrary from and to parameters: the handler answers
// 200 or 400 with a JSON body, never panics or fails otherwise.
func FuzzTimeRange(f *testing.F) {
	for _, s := range [][2]string{{"2026-06-14T09:00:00Z", "2026-06-14T09:01:00Z"}, {"", ""}, {"yesterday", ""},
		{"2026-06-14T09:00:00+02:00", "2026-06-14T09:00:00.123456789Z"}, {"9999-12-31T23:59:59Z", "0000-01-01T00:00:00Z"}} {
		f.Add(s[0], s[1])
	}
	_, h := fixture(f)
	f.Fuzz(func(t *testing.T, from, to string) {
		q := url.Values{}
		if from != "" {
			q.Set("from", from)
		}
		if to != "" {
			q.Set("to", to)
		}
		for _, p := range []string{"/api/structures/alder-creek/members/D2/series?", "/api/structures/alder-creek/events?"} {
			rec := httptest.NewRecorder()
			h.ServeHTTP(rec, httptest.NewRequest(http.MethodGet, p+q.Encode(), nil))
			if rec.Code != 200 && rec.Code != 400 {
				t.Fatalf("from %q to %q: status %d", from, to, rec.Code)
			}
			if !json.Valid(rec.Body.Bytes()) {
				t.Fatalf("from %q to %q: body is not JSON: %s", from, to, rec.Body.String())
			}
		}
	})
}

// TestStateAlarmsJSON: the state carries the active alarms with their
// causes in groups, each size with its standard deviation and the time of
// its latest revision, the unknown loads flagged when the alarm rose, the
// adapted fit, and the nominal w beside the adapted one (null while the
// fit is not adapted).
func TestStateAlarmsJSON(t *testing.T) {
	src, h := fixture(t)
	src.mu.Lock()
	last := &src.history[len(src.history)-1]
	revised := last.Epoch
	last.Alarms = []ActiveAlarm{{Rule: "MemberDiverging", Subject: "D2", Since: t0.Add(48 * time.Second), FiredAt: t0.Add(53 * time.Second),
		Causes: []reconcile.RankedCause{
			{Kind: reconcile.GaugeFault, Subject: "D2", Label: "gauge D2", T: 410, Size: 3050, Unit: "N", Std: 40, Group: 1},
			{Kind: reconcile.StiffnessChange, Subject: "D2", Label: "E A of D2", T: 410, Size: -29.6, Unit: "%", Std: 0.3, Group: 1},
		},
		CausesAt:   revised,
		LoadShifts: []LoadShift{{Pattern: "crowd", Value: -0.41, Mean: 0.02, StdDev: 0.03, Unit: "kPa", Z: -9.8}}}}
	last.Adapted = &AdaptedFit{Hypotheses: []reconcile.RankedCause{{Kind: reconcile.StiffnessChange, Subject: "D2", Label: "E A of D2", Size: -29.9, Unit: "%", Std: 0.6}},
		ChiSquare: 12.5, DOF: 6, PValue: 0.052}
	last.Gauged[0].WNominal = 4.4
	for i := 1; i < len(last.Gauged); i++ {
		last.Gauged[i].WNominal = math.NaN()
	}
	src.mu.Unlock()
	code, body, _ := get(t, h, "/api/structures/alder-creek/state")
	if code != 200 {
		t.Fatalf("status %d: %s", code, body)
	}
	var st struct {
		Alarms []struct {
			Rule     string  `json:"rule"`
			FiredAt  string  `json:"fired_at"`
			CausesAt *string `json:"causes_at"`
			Causes   []struct {
				Label string   `json:"label"`
				Size  *float64 `json:"size"`
				Std   *float64 `json:"std"`
				Group int      `json:"group"`
			} `json:"causes"`
			LoadShifts []struct {
				Pattern string   `json:"pattern"`
				Z       *float64 `json:"z"`
				Unit    string   `json:"unit"`
			} `json:"load_shifts"`
		} `json:"alarms"`
		Adapted *struct {
			Hypotheses []struct {
				Label string   `json:"label"`
				Std   *float64 `json:"std"`
			} `json:"hypotheses"`
			DOF int `json:"dof"`
		} `json:"adapted"`
		Gauged []struct {
			WNominal *float64 `json:"w_nominal"`
		} `json:"gauged"`
	}
	if err := json.Unmarshal([]byte(body), &st); err != nil {
		t.Fatal(err)
	}
	if len(st.Alarms) != 1 {
		t.Fatalf("alarms %+v", st.Alarms)
	}
	a := st.Alarms[0]
	if a.Rule != "MemberDiverging" || a.FiredAt != "2026-06-14T09:00:53Z" || a.CausesAt == nil || *a.CausesAt != revised.Format(time.RFC3339Nano) {
		t.Errorf("alarm %+v", a)
	}
	if len(a.Causes) != 2 || a.Causes[1].Label != "E A of D2" || *a.Causes[1].Size != -29.6 || *a.Causes[1].Std != 0.3 || a.Causes[0].Group != 1 || a.Causes[1].Group != 1 {
		t.Errorf("alarm causes %+v", a.Causes)
	}
	if len(a.LoadShifts) != 1 || a.LoadShifts[0].Pattern != "crowd" || *a.LoadShifts[0].Z != -9.8 || a.LoadShifts[0].Unit != "kPa" {
		t.Errorf("load shifts %+v", a.LoadShifts)
	}
	if st.Adapted == nil || st.Adapted.DOF != 6 || len(st.Adapted.Hypotheses) != 1 || *st.Adapted.Hypotheses[0].Std != 0.6 {
		t.Errorf("adapted %+v", st.Adapted)
	}
	if st.Gauged[0].WNominal == nil || *st.Gauged[0].WNominal != 4.4 || st.Gauged[1].WNominal != nil {
		t.Errorf("w_nominal %v, %v; want 4.4 and null", st.Gauged[0].WNominal, st.Gauged[1].WNominal)
	}
	// Without an active alarm: an empty list and no adapted fit.
	_, h = fixture(t)
	_, body, _ = get(t, h, "/api/structures/alder-creek/state")
	var plain map[string]any
	if err := json.Unmarshal([]byte(body), &plain); err != nil {
		t.Fatal(err)
	}
	if al, ok := plain["alarms"].([]any); !ok || len(al) != 0 || plain["adapted"] != nil {
		t.Errorf("state without an alarm: alarms %v, adapted %v; want [] and null", plain["alarms"], plain["adapted"])
	}
}
