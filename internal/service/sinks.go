package service

import (
	"context"
	"encoding/json"
	"log/slog"
	"sync"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/store"
)

// metricsSink sets the Prometheus metrics of one structure from each epoch.
type metricsSink struct {
	m     *metrics.Metrics
	sm    *metrics.StructureMetrics
	name  string
	rules []alerts.Rule
	last  map[alerts.RuleName]int
	skewN uint64
	state *metrics.MemberStateMetrics // every member's total state
	loads *metrics.UnknownLoadMetrics // unknown loads in their engineering quantity
	// adapt are the adaptation gauges; unknown the unknown patterns in
	// their order.
	adapt   *metrics.AdaptationMetrics
	unknown []string
}

// Epoch updates the member, fit, load, epoch and alarm metrics.
func (ms *metricsSink) Epoch(r *pipeline.Result) {
	ms.m.Epoch(ms.name, r.Outcome, r.Took)
	if r.SkewedReadings > ms.skewN {
		ms.m.ClockSkew(ms.name, int(r.SkewedReadings-ms.skewN))
		ms.skewN = r.SkewedReadings
	}
	if r.Outcome == reconcile.OutcomeAccepted || r.Outcome == reconcile.OutcomeRejected {
		for i, mr := range r.Members {
			if !mr.Available {
				continue
			}
			_ = ms.sm.SetMember(i, metrics.MemberValues{Measured: mr.MeasuredN, Predicted: mr.FittedN, Residual: mr.AdjustedN,
				W: mr.W, MDB: mr.MDBN, Redundancy: mr.Redundancy, Checkable: mr.Checkable})
		}
		ms.sm.SetFit(r.ChiSquare, r.DOF, r.PValue)
		ms.setAdaptation(r)
		setMemberState(ms.state, r.State)
		for j, ld := range r.Loads {
			if j < len(r.Loads) && ld.Estimable {
				_ = ms.sm.SetUnknownLoad(j, ld.Value, ld.Std)
				ms.loads.Set(j, ld.Value)
			}
		}
	}
	count := map[alerts.RuleName]int{}
	for _, a := range r.Active {
		count[a.Rule]++
	}
	for _, rule := range ms.rules {
		if n := count[rule.Name]; n != ms.last[rule.Name] || len(ms.last) == 0 {
			ms.m.AlarmsFiring(ms.name, string(rule.Name), n)
			ms.last[rule.Name] = n
		}
	}
}

// setAdaptation sets the nominal w, the adapted fit and the flagged
// unknown loads of a fitted epoch.
func (ms *metricsSink) setAdaptation(r *pipeline.Result) {
	for i, mr := range r.Members {
		if !mr.Available {
			continue
		}
		w := mr.W
		if r.Adapted != nil {
			w = mr.WNominal
		}
		_ = ms.adapt.SetNominalW(i, w)
	}
	if r.Adapted != nil {
		ms.adapt.SetAdapted(len(r.Adapted.Hypotheses), r.Adapted.ChiSquare, r.Adapted.DOF)
	} else {
		ms.adapt.SetAdapted(0, 0, 0)
	}
	// A load stays flagged while an alarm that flagged it is active.
	z := map[string]float64{}
	for _, a := range r.Active {
		for _, l := range a.LoadShifts {
			z[l.Pattern] = l.Z
		}
	}
	for j, p := range ms.unknown {
		v, ok := z[p]
		_ = ms.adapt.SetLoadShift(j, ok, v)
	}
}

// storedResult is the compact JSON form of an epoch result kept in the
// store (for history beyond memory and for audits).
type storedResult struct {
	Outcome   string                   `json:"outcome"`
	Reason    string                   `json:"reason,omitempty"`
	ChiSquare float64                  `json:"chi_square"`
	DOF       int                      `json:"dof"`
	PValue    float64                  `json:"p_value"`
	Members   []storedMember           `json:"members,omitempty"`
	Loads     []reconcile.LoadEstimate `json:"loads,omitempty"`
	Causes    []reconcile.RankedCause  `json:"causes,omitempty"`
}

type storedMember struct {
	Member    string  `json:"member"`
	Measured  float64 `json:"measured_n"`
	Fitted    float64 `json:"fitted_n"`
	Sigma     float64 `json:"sigma_residual_n"`
	W         float64 `json:"w"`
	Checkable bool    `json:"checkable"`
}

// resultSink buffers results and stores them in batches.
type resultSink struct {
	mu    sync.Mutex
	store *store.Store
	log   *slog.Logger
	buf   []store.Result
	// warned is when the last "not stored" warning was logged (one a
	// minute at most).
	warned time.Time
}

// Epoch buffers one result (fitted or not).
func (rs *resultSink) Epoch(r *pipeline.Result) {
	sr := storedResult{Outcome: r.Outcome, Reason: r.Reason, ChiSquare: r.ChiSquare, DOF: r.DOF, PValue: r.PValue, Loads: r.Loads}
	if len(r.Causes) > 3 {
		sr.Causes = r.Causes[:3]
	} else {
		sr.Causes = r.Causes
	}
	for _, m := range r.Members {
		if m.Available {
			sr.Members = append(sr.Members, storedMember{Member: m.Member, Measured: m.MeasuredN, Fitted: m.FittedN, Sigma: m.SigmaAdjustedN, W: m.W, Checkable: m.Checkable})
		}
	}
	payload, err := json.Marshal(sr)
	if err != nil {
		rs.log.Warn("result not stored", "structure", r.Structure, "time", r.Time, "error", err)
		return
	}
	rs.mu.Lock()
	rs.buf = append(rs.buf, store.Result{Structure: r.Structure, Time: r.Time, Payload: payload})
	full := len(rs.buf) >= 500 && len(rs.buf)%500 == 0
	rs.mu.Unlock()
	if full {
		rs.flush()
	}
}

// flush stores the buffered results.
func (rs *resultSink) flush() {
	rs.mu.Lock()
	buf := rs.buf
	rs.buf = nil
	rs.mu.Unlock()
	if len(buf) == 0 || rs.store == nil {
		return
	}
	if err := rs.store.PutResults(context.Background(), buf); err != nil {
		// Kept for the next flush (a full disk passes); beyond
		// maxUnstoredResults the oldest are given up: results are
		// recomputable from the stored readings by monitor replay.
		rs.mu.Lock()
		rs.buf = append(buf, rs.buf...)
		lost := 0
		if over := len(rs.buf) - maxUnstoredResults; over > 0 {
			lost = over
			rs.buf = append(rs.buf[:0], rs.buf[over:]...)
		}
		n := len(rs.buf)
		quiet := time.Since(rs.warned) < time.Minute && lost == 0
		if !quiet {
			rs.warned = time.Now()
		}
		rs.mu.Unlock()
		if quiet {
			return
		}
		rs.log.Warn("epoch results not stored yet; kept for a retry at the next flush", "waiting", n, "given_up", lost, "error", err)
	}
}

// maxUnstoredResults bounds the epoch results kept in memory while the
// store refuses them: a day of 1 s epochs of one structure.
const maxUnstoredResults = 86_400
