package metrics

import (
	"bytes"
	"errors"
	"flag"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
)

var update = flag.Bool("update", false, "rewrite testdata/metrics.golden")

// Observer is the contract of internal/ingest (ingest.Observer), repeated
// here so that the test fails when Metrics stops satisfying it.
type Observer interface {
	MessageHandled(structure, outcome string)
	ReadingsHandled(structure, outcome string, n int)
	Rejected(structure, reason string)
	LastReading(structure, channel string, t time.Time)
	BrokerDropped(n int)
}

var _ Observer = (*Metrics)(nil)

// example fills the metrics with a fixed epoch of the Alder Creek
// footbridge (invented demo values).
func example(t testing.TB) (*prometheus.Registry, *Metrics) {
	reg := prometheus.NewRegistry()
	m, err := New(reg)
	if err != nil {
		t.Fatal(err)
	}
	s := m.Structure("alder-creek", []string{"B4", "D2"}, []string{"crowd"})
	if err := s.SetMember(0, MemberValues{Measured: 412500, Predicted: 409800, Residual: 2700, W: 0.84, MDB: 14100, Redundancy: 0.71, Checkable: true}); err != nil {
		t.Fatal(err)
	}
	if err := s.SetMember(1, MemberValues{Measured: -88200, Predicted: -95400, Residual: 7200, W: 4.12, MDB: 9800, Redundancy: 0.62, Checkable: true}); err != nil {
		t.Fatal(err)
	}
	s.SetFit(21.4, 13, 0.065)
	st := m.MemberState("alder-creek", []string{"B4", "D2", "V0"})
	if err := st.Set(1, StateValues{TotalN: 91190, PredictedTotalN: 66790, ZeroStateN: 64200, StressPa: 32.34e6, Utilisation: 0.0911, PredictedUtilisation: 0.0667}); err != nil {
		t.Fatal(err)
	}
	nan := math.NaN() // V0 with no design basis value: its utilisation series stay unset
	if err := st.Set(2, StateValues{TotalN: -5625, PredictedTotalN: -5625, ZeroStateN: nan, StressPa: -1.99e6, Utilisation: nan, PredictedUtilisation: nan}); err != nil {
		t.Fatal(err)
	}
	ul, err := m.UnknownLoads("alder-creek", []string{"crowd", "drift"}, []LoadReference{{Quantity: LoadPressure, PerFactor: 1000}, {}})
	if err != nil {
		t.Fatal(err)
	}
	ul.Set(0, 3.25) // 3.25 x 1 kPa
	ul.Set(1, 2)    // no reference load: no series
	if _, err := m.UnknownLoads("alder-creek", []string{"crowd"}, nil); err == nil {
		t.Fatal("a pattern without its reference accepted")
	}
	if err := st.Set(3, StateValues{}); err == nil {
		t.Fatal("member index 3 of 3 accepted")
	}
	if err := s.SetUnknownLoad(0, 3.25, 0.41); err != nil {
		t.Fatal(err)
	}
	// D2's alarm carries its stiffness change: B4's w comes from the
	// adapted fit, its nominal w beside it; the crowd is flagged.
	ad := m.Adaptation("alder-creek", []string{"B4", "D2"}, []string{"crowd"})
	if err := ad.SetNominalW(0, -2.31); err != nil {
		t.Fatal(err)
	}
	if err := ad.SetNominalW(1, 4.12); err != nil {
		t.Fatal(err)
	}
	if err := ad.SetNominalW(2, 0); err == nil {
		t.Fatal("member index 2 of 2 accepted")
	}
	ad.SetAdapted(1, 9.8, 12)
	if err := ad.SetLoadShift(0, true, -6.4); err != nil {
		t.Fatal(err)
	}
	if err := ad.SetLoadShift(1, true, 1); err == nil {
		t.Fatal("pattern index 1 of 1 accepted")
	}
	m.Epoch("alder-creek", EpochAccepted, 85*time.Microsecond)
	m.Epoch("alder-creek", EpochRejected, 120*time.Microsecond)
	m.MessageHandled("alder-creek", "stored")
	m.MessageHandled("alder-creek", "stored")
	m.MessageHandled("alder-creek", "duplicate")
	m.ReadingsHandled("alder-creek", "stored", 72)
	m.Rejected("alder-creek", "unknown_channel")
	m.LastReading("alder-creek", "B4_a", time.Unix(1780000000, 500e6))
	m.LastReading("alder-creek", "B4_a", time.Unix(1779999990, 0)) // late: does not move back
	m.ClockSkew("alder-creek", 3)
	m.AlarmsFiring("alder-creek", "MemberDiverging", 1)
	m.BrokerDropped(2)
	return reg, m
}

func TestMetricsGolden(t *testing.T) {
	reg, _ := example(t)
	srv := httptest.NewServer(Handler(reg, nil))
	defer srv.Close()
	resp, err := http.Get(srv.URL + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	golden := filepath.Join("testdata", "metrics.golden")
	if *update {
		if err := os.WriteFile(golden, body, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if !bytes.Equal(body, want) {
		t.Errorf("/metrics differs from %s (rerun with -update after checking):\n%s", golden, body)
	}
}

func TestValuesAndLint(t *testing.T) {
	reg, m := example(t)
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"w of D2", testutil.ToFloat64(m.w.WithLabelValues("alder-creek", "D2")), 4.12},
		{"stored messages", testutil.ToFloat64(m.messages.WithLabelValues("alder-creek", "stored")), 2},
		{"stored readings", testutil.ToFloat64(m.readings.WithLabelValues("alder-creek", "stored")), 72},
		{"last reading B4_a", testutil.ToFloat64(m.lastReading.WithLabelValues("alder-creek", "B4_a")), 1780000000.5},
		{"dropped", testutil.ToFloat64(m.dropped), 2},
	} {
		if c.got != c.want {
			t.Errorf("%s = %v, want %v", c.name, c.got, c.want)
		}
	}
	const want = `
# HELP shm_ingest_rejections_total Rejected payloads (dead letters), by reason.
# TYPE shm_ingest_rejections_total counter
shm_ingest_rejections_total{reason="unknown_channel",structure="alder-creek"} 1
`
	if err := testutil.CollectAndCompare(m.rejections, strings.NewReader(want)); err != nil {
		t.Error(err)
	}
	problems, err := testutil.GatherAndLint(reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("lint: %s: %s", p.Metric, p.Text)
	}
	for _, col := range []prometheus.Collector{m.epochs, m.latency, m.lastReading} {
		if ps, err := testutil.CollectAndLint(col); err != nil || len(ps) != 0 {
			t.Errorf("lint: %v %v", ps, err)
		}
	}
	if _, err := New(reg); err == nil {
		t.Error("second registration on the same registry accepted")
	}
	if _, err := New(nil); err == nil {
		t.Error("nil registry accepted")
	}
}

func TestHealthAndReady(t *testing.T) {
	reg := prometheus.NewRegistry()
	var notReady error = errors.New("model not loaded")
	h := Handler(reg, func() error { return notReady })
	get := func(path string) (int, string) {
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest(http.MethodGet, path, nil))
		return rec.Code, rec.Body.String()
	}
	if code, _ := get("/healthz"); code != 200 {
		t.Errorf("/healthz %d", code)
	}
	if code, body := get("/readyz"); code != 503 || !strings.Contains(body, "model not loaded") {
		t.Errorf("/readyz %d %q, want 503 with the reason", code, body)
	}
	notReady = nil
	if code, _ := get("/readyz"); code != 200 {
		t.Errorf("/readyz %d after ready", code)
	}
}

func BenchmarkObserver(b *testing.B) {
	reg := prometheus.NewRegistry()
	m, err := New(reg)
	if err != nil {
		b.Fatal(err)
	}
	b.Run("ReadingsHandled", func(b *testing.B) {
		for b.Loop() {
			m.ReadingsHandled("alder-creek", "stored", 1)
		}
	})
	b.Run("WithLabelValues", func(b *testing.B) {
		for b.Loop() {
			m.readings.WithLabelValues("alder-creek", "stored").Add(1)
		}
	})
	s := m.Structure("alder-creek", []string{"B4"}, nil)
	b.Run("SetMember", func(b *testing.B) {
		for b.Loop() {
			_ = s.SetMember(0, MemberValues{W: 1})
		}
	})
}

// TestAdaptationEnds: when the last statistical alarm clears the adapted
// fit's series and the flagged load's z go away; the count and the flag
// read 0.
func TestAdaptationEnds(t *testing.T) {
	reg, m := example(t)
	ad := m.Adaptation("alder-creek", []string{"B4", "D2"}, []string{"crowd"})
	ad.SetAdapted(1, 9.8, 12)
	if err := ad.SetLoadShift(0, true, -6.4); err != nil {
		t.Fatal(err)
	}
	ad.SetAdapted(0, 0, 0)
	if err := ad.SetLoadShift(0, false, 0); err != nil {
		t.Fatal(err)
	}
	const want = `
# HELP shm_adapted_hypotheses Number of identified hypotheses the fit carries as parameters while statistical alarms are active (0: the nominal fit).
# TYPE shm_adapted_hypotheses gauge
shm_adapted_hypotheses{structure="alder-creek"} 0
# HELP shm_unknown_load_shift_flagged 1 while an active alarm flags the unknown load's estimate as having left its recent distribution when the alarm rose (it may be absorbing the fault), else 0.
# TYPE shm_unknown_load_shift_flagged gauge
shm_unknown_load_shift_flagged{pattern="crowd",structure="alder-creek"} 0
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(want), AdaptedHypotheses, AdaptedChiSquare, AdaptedDOF, UnknownLoadShifted, UnknownLoadShiftZ); err != nil {
		t.Error(err)
	}
}
