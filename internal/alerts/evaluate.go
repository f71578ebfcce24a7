package alerts

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"
	"sync"
	"time"
	"trussmonitor/internal/reconcile"
)

// Lookback is how far back an absent counter sample is looked for, as
// Prometheus's default lookback delta (5 minutes): the counting signals
// take the counter value Window ago as the latest sample in
// [t - Window - Lookback, t - Window], and 0 when there is none, exactly
// like the generated PromQL (`x - (x offset W or x * 0)`).
const Lookback = 5 * time.Minute

// Observation is what the evaluator sees of one structure at one epoch.
// Members, channels and the fit not given keep their last values (the
// metrics keep theirs too, so Prometheus sees the same).
type Observation struct {
	Time      time.Time // epoch time: the evaluator's clock
	Structure string
	Fit       *Fit      // nil when the epoch was not fitted
	Members   []Member  // gauged members fitted in this epoch
	Channels  []Channel // last reading time per channel
	// SkewCount and RejectCount are cumulative counts since the service
	// started (the values of the shm_clock_skew_readings_total and summed
	// shm_ingest_rejections_total counters).
	SkewCount   uint64
	RejectCount uint64
	// CommitFailures is the cumulative count of failed store commits
	// (shm_ingest_commit_failures_total); BrokerConnected the broker
	// connection now (shm_broker_connected), nil when there is no broker
	// (replay): the rule then has no value.
	CommitFailures  uint64
	BrokerConnected *bool
	// ReconcileDropped is the cumulative count of committed readings left
	// out of live reconciliation: its queue was full and reading them back
	// from the store failed (shm_reconcile_queue_dropped_readings_total;
	// 0 in replay).
	ReconcileDropped uint64
	// Causes are the epoch's top-ranked causes (most likely first).
	Causes []reconcile.RankedCause
	// Utilisation are the members' utilisations of a fitted epoch
	// (structures with a design basis only).
	Utilisation []Utilisation
	// LoadShifts are the unknown-load estimates of this epoch that left
	// their recent distribution; an alarm of an identifying rule raised
	// at this epoch carries them (they may be absorbing the fault).
	LoadShifts []reconcile.LoadShift
}

// Utilisation is one member's utilisation (|total force| / design
// resistance) in an epoch.
type Utilisation struct {
	Member string
	Value  float64
}

// Fit is the global test of an epoch.
type Fit struct {
	ChiSquare float64
	DOF       int
	PValue    float64
}

// Member is one gauged member's test in an epoch.
type Member struct {
	Member        string
	W             float64
	Checkable     bool
	EstimatedBias float64                 // gauge-fault estimate e_i / r_i, newtons
	Causes        []reconcile.RankedCause // optional: causes ranked for this member
	// Restart is true when the member's w comes from a changed fit from
	// this epoch on (adaptation began, changed or ended): the mean rules
	// forget its earlier samples, which test a model no longer in force.
	Restart bool
}

// Channel is a channel's freshness.
type Channel struct {
	Channel     string
	LastReading time.Time // zero: no reading known
	// WatchedSince is when monitoring of the channel began (the service's
	// start). A channel with no reading known is silent since then; zero
	// (replay) leaves such a channel without a value.
	WatchedSince time.Time
}

// EventKind says whether an event raised or cleared its alarm.
type EventKind string

// Event kinds.
const (
	Raised  EventKind = "raised"
	Cleared EventKind = "cleared"
)

// Event is an alarm being raised or cleared.
type Event struct {
	Structure string
	Rule      RuleName
	Subject   string // member or channel; "" for the whole structure
	Kind      EventKind
	Time      time.Time
	Evidence  Evidence
}

// Evidence is what was seen when the event happened.
type Evidence struct {
	Signal      string                  `json:"signal"`
	Value       float64                 `json:"value"`     // the signal's value (0 when it has none)
	Threshold   float64                 `json:"threshold"` // Raise for raised, Clear for cleared
	ActiveSince time.Time               `json:"active_since"`
	W           float64                 `json:"w,omitempty"`
	Bias        float64                 `json:"estimated_bias_newtons,omitempty"`
	PValue      float64                 `json:"p_value,omitempty"`
	ChiSquare   float64                 `json:"chi_square,omitempty"`
	DOF         int                     `json:"dof,omitempty"`
	Causes      []reconcile.RankedCause `json:"causes,omitempty"` // top three, or the whole first group
	// Epochs is the number of epochs behind Value for a mean rule (Value
	// is then the mean of the statistic over the for-duration, or over the
	// hold-off for a cleared event).
	Epochs int `json:"epochs,omitempty"`
	// CausesAt is, for a raised event of a statistical rule, the epoch
	// time its Causes are estimated as of: the raise, or the latest
	// revision while the alarm was active (see Evaluator.Revise), their
	// sizes then estimated over the epochs from the fault's onset to
	// CausesAt. Zero for the other events.
	CausesAt time.Time `json:"causes_at,omitzero"`
	// LoadShifts flags the unknown-load estimates that left their recent
	// distribution when the alarm rose.
	LoadShifts []reconcile.LoadShift `json:"load_shifts,omitempty"`
}

// EventSink stores events (the store package, adapted by the caller).
type EventSink interface {
	PutEvent(ctx context.Context, e Event) error
	// ReviseEvent replaces the evidence of the stored raised event of
	// e.Structure, e.Rule and e.Subject at e.Time with e.Evidence (the
	// causes revised while the alarm is active); a raised event no longer
	// stored (retention) is not an error.
	ReviseEvent(ctx context.Context, e Event) error
}

// alarmKey identifies an alarm of a structure: its rule and subject.
type alarmKey struct {
	rule    RuleName
	subject string
}

// Alarm is a firing alarm.
type Alarm struct {
	Rule    RuleName
	Subject string
	Since   time.Time // when its raise condition first held
	FiredAt time.Time
	// Identifies is true for the alarms of statistical rules, whose events
	// carry identified causes (and whose causes Revise updates).
	Identifies bool
	// Causes are the alarm's causes: those of its raised event, or their
	// latest revision, as of CausesAt (zero for a rule without causes).
	Causes   []reconcile.RankedCause
	CausesAt time.Time
	// LoadShifts are the unknown loads flagged when the alarm rose.
	LoadShifts []reconcile.LoadShift
}

// ReviseEvery is the least epoch time between two revisions of an active
// alarm's stored raised event (Revise): the alarm held in memory is
// revised at every epoch, the stored row at most once a minute, and once
// more as the alarm clears, so that the store keeps the sizes of the
// fault's whole duration without a write per epoch.
const ReviseEvery = time.Minute

// Evaluator evaluates rules over observations. It is safe for concurrent
// use; observations of one structure must come in time order.
type Evaluator struct {
	rules    []Rule
	keep     time.Duration
	meanKeep time.Duration
	sink     EventSink
	mu       sync.Mutex
	st       map[string]*structState

	sinkMu   sync.Mutex     // serialises storing, guards unstored
	unstored []pendingEvent // events the sink refused, oldest first, retried
}

// pendingEvent is an event or a revision of a raised event waiting for
// the sink.
type pendingEvent struct {
	ev     Event
	revise bool
}

// MaxUnstored bounds the events kept for a retry while the sink fails (a
// full disk): far more than alarms raise and clear in days of a failing
// disk. Beyond it the oldest are given up, and Observe's error says so.
const MaxUnstored = 10_000

type alarmState struct {
	pending, firing bool
	activeAt, fired time.Time
	// raised is the alarm's raised event with its causes revised to
	// causesAt; storedAt is the causesAt of the last revision handed to
	// the sink.
	raised             Event
	causesAt, storedAt time.Time
}

type sample struct {
	t time.Time
	v float64
}

type structState struct {
	last        time.Time
	seen        bool
	members     map[string]Member
	util        map[string]float64
	fit         *Fit
	channels    map[string]time.Time
	watched     map[string]time.Time
	skew, rej   []sample
	commitFail  []sample
	recDrop     []sample
	broker      *bool
	causes      []reconcile.RankedCause
	alarms      map[alarmKey]*alarmState
	firingCount map[RuleName]int
	keep        time.Duration // counter history kept: longest window + Lookback
	// Per-epoch statistics of the mean rules: w of each member in the
	// epochs where it was measured and checkable, the fit score of each
	// fitted epoch, and when each was last measured at all.
	wHist    map[string]*meanSeries
	wSeen    map[string]time.Time
	fitHist  *meanSeries
	fitSeen  time.Time
	meanKeep time.Duration // longest For or Hold of a mean rule
	rules    []Rule        // the evaluator's rules (shared, read-only)
	// revisions are the revised raised events of alarms cleared in this
	// evaluation whose latest revision was not yet stored.
	revisions []Event
	// The keys of members, util, channels and watched in name order
	// (instances lists subjects in that order), and the instances buffer.
	memberNames, utilNames     []string
	channelNames, watchedNames []string
	instBuf                    []instance
}

// insertName adds name to the sorted list names unless it is there.
func insertName(names []string, name string) []string {
	i, found := slices.BinarySearch(names, name)
	if found {
		return names
	}
	return slices.Insert(names, i, name)
}

// NewEvaluator checks the rules and returns an evaluator that stores its
// events in sink (nil: events are only returned).
func NewEvaluator(rules []Rule, sink EventSink) (*Evaluator, error) {
	seen := map[RuleName]bool{}
	for _, r := range rules {
		if err := r.Validate(); err != nil {
			return nil, err
		}
		if seen[r.Name] {
			return nil, fmt.Errorf("alerts: rule %s defined twice", r.Name)
		}
		seen[r.Name] = true
	}
	keep := Lookback
	var meanKeep time.Duration
	for _, r := range rules {
		keep = max(keep, r.Window+Lookback)
		if r.Mean {
			meanKeep = max(meanKeep, r.For, r.Hold)
		}
	}
	return &Evaluator{rules: append([]Rule(nil), rules...), keep: keep, meanKeep: meanKeep, sink: sink, st: map[string]*structState{}}, nil
}

// Observe evaluates every rule at o.Time and returns the events (raised
// and cleared) in rule order, then subject order. Events are also stored
// in the sink, in order: an event the sink refuses (a full disk) is kept
// and retried, with every later one, at each following Observe (or Retry)
// until the sink takes it, so an event is never lost to a passing storage
// failure; the error of a failed attempt is returned, and the alarm states
// advance regardless.
func (e *Evaluator) Observe(ctx context.Context, o Observation) ([]Event, error) {
	if o.Structure == "" {
		return nil, errors.New("alerts: observation without a structure name")
	}
	if o.Time.IsZero() {
		return nil, fmt.Errorf("alerts: observation of %s has no time; pass the epoch time", o.Structure)
	}
	e.mu.Lock()
	s := e.st[o.Structure]
	if s == nil {
		s = &structState{members: map[string]Member{}, util: map[string]float64{}, channels: map[string]time.Time{}, watched: map[string]time.Time{},
			alarms: map[alarmKey]*alarmState{}, firingCount: map[RuleName]int{}, keep: e.keep,
			wHist: map[string]*meanSeries{}, wSeen: map[string]time.Time{}, meanKeep: e.meanKeep, rules: e.rules}
		e.st[o.Structure] = s
	}
	if s.seen && o.Time.Before(s.last) {
		e.mu.Unlock()
		return nil, fmt.Errorf("alerts: observation of %s at %s is before the previous one at %s; epochs must arrive in time order",
			o.Structure, o.Time.Format(time.RFC3339Nano), s.last.Format(time.RFC3339Nano))
	}
	s.last, s.seen = o.Time, true
	s.update(o)
	var events []Event
	for _, r := range e.rules {
		events = s.evaluate(r, o, events)
	}
	pending := make([]pendingEvent, 0, len(s.revisions)+len(events))
	for _, ev := range s.revisions {
		pending = append(pending, pendingEvent{ev: ev, revise: true})
	}
	s.revisions = s.revisions[:0]
	for _, ev := range events {
		pending = append(pending, pendingEvent{ev: ev})
	}
	e.mu.Unlock()
	if e.sink == nil {
		return events, nil
	}
	return events, e.store(ctx, pending)
}

// Revise replaces the causes of the firing alarm of rule on subject of
// structure with causes estimated over the epochs since the fault began,
// as of the epoch at t (DESIGN.md, Identification and adaptation: the
// event's size is updated while the alarm is active). Active returns the
// revised causes at once; the stored raised event is revised when
// ReviseEvery has passed since its last revision, and once more when the
// alarm clears. The causes are cut as an event's (the top three, and the
// whole first group). It reports whether an alarm was revised; an error
// is the sink's, as for Observe.
func (e *Evaluator) Revise(ctx context.Context, structure string, rule RuleName, subject string, causes []reconcile.RankedCause, t time.Time) (bool, error) {
	e.mu.Lock()
	s := e.st[structure]
	var a *alarmState
	if s != nil {
		a = s.alarms[alarmKey{rule, subject}]
	}
	if a == nil || !a.firing || t.Before(a.fired) {
		e.mu.Unlock()
		return false, nil
	}
	a.raised.Evidence.Causes = append([]reconcile.RankedCause(nil), ShownCauses(causes)...)
	a.raised.Evidence.CausesAt = t
	a.causesAt = t
	var pending []pendingEvent
	if t.Sub(a.storedAt) >= ReviseEvery {
		a.storedAt = t
		pending = append(pending, pendingEvent{ev: a.raised.clone(), revise: true})
	}
	e.mu.Unlock()
	if e.sink == nil || len(pending) == 0 {
		return true, nil
	}
	return true, e.store(ctx, pending)
}

// clone returns a copy of the event that shares no slice with it.
func (ev Event) clone() Event {
	ev.Evidence.Causes = append([]reconcile.RankedCause(nil), ev.Evidence.Causes...)
	ev.Evidence.LoadShifts = append([]reconcile.LoadShift(nil), ev.Evidence.LoadShifts...)
	return ev
}

// Retry stores the events kept after a sink failure; nil when none are
// left.
func (e *Evaluator) Retry(ctx context.Context) error {
	if e.sink == nil {
		return nil
	}
	return e.store(ctx, nil)
}

// Unstored returns how many events wait for the sink.
func (e *Evaluator) Unstored() int {
	e.sinkMu.Lock()
	defer e.sinkMu.Unlock()
	return len(e.unstored)
}

// store appends events to the unstored ones and stores them in order,
// stopping at the first the sink refuses.
func (e *Evaluator) store(ctx context.Context, events []pendingEvent) error {
	e.sinkMu.Lock()
	defer e.sinkMu.Unlock()
	e.unstored = append(e.unstored, events...)
	var lost int
	if over := len(e.unstored) - MaxUnstored; over > 0 {
		lost = over
		e.unstored = append(e.unstored[:0], e.unstored[over:]...)
	}
	done := 0
	var err error
	for _, p := range e.unstored {
		ev, what := p.ev, "storing"
		var perr error
		if p.revise {
			what = "revising the causes of"
			perr = e.sink.ReviseEvent(ctx, ev)
		} else {
			perr = e.sink.PutEvent(ctx, ev)
		}
		if perr != nil {
			err = fmt.Errorf("alerts: %s %s event of %s/%s %s (at %s): %w; %d events kept for a retry at the next evaluation",
				what, ev.Kind, ev.Structure, ev.Rule, ev.Subject, ev.Time.Format(time.RFC3339), perr, len(e.unstored)-done)
			break
		}
		done++
	}
	e.unstored = append(e.unstored[:0], e.unstored[done:]...)
	if lost > 0 {
		err = errors.Join(err, fmt.Errorf("alerts: %d oldest unstored events given up (more than %d waiting)", lost, MaxUnstored))
	}
	return err
}

// Active returns the firing alarms of structure, ordered by rule and
// subject.
func (e *Evaluator) Active(structure string) []Alarm {
	e.mu.Lock()
	defer e.mu.Unlock()
	s := e.st[structure]
	if s == nil {
		return nil
	}
	var out []Alarm
	for k, a := range s.alarms {
		if a.firing {
			ev := a.raised.clone()
			out = append(out, Alarm{Rule: k.rule, Subject: k.subject, Since: a.activeAt, FiredAt: a.fired, Identifies: s.signal(k.rule).identifies(),
				Causes: ev.Evidence.Causes, CausesAt: ev.Evidence.CausesAt, LoadShifts: ev.Evidence.LoadShifts})
		}
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Rule != out[j].Rule {
			return out[i].Rule < out[j].Rule
		}
		return out[i].Subject < out[j].Subject
	})
	return out
}

// FiringCount returns how many alarms of rule are firing for structure
// (the value of shm_alarms_firing).
func (e *Evaluator) FiringCount(structure string, rule RuleName) int {
	e.mu.Lock()
	defer e.mu.Unlock()
	if s := e.st[structure]; s != nil {
		return s.firingCount[rule]
	}
	return 0
}

// signal returns the signal of the rule named name (0 when none).
func (s *structState) signal(name RuleName) Signal {
	for _, r := range s.rules {
		if r.Name == name {
			return r.Signal
		}
	}
	return 0
}

// update folds the observation into the held values.
func (s *structState) update(o Observation) {
	for _, m := range o.Members {
		if _, ok := s.members[m.Member]; !ok {
			s.memberNames = insertName(s.memberNames, m.Member)
		}
		s.members[m.Member] = m
	}
	for _, u := range o.Utilisation {
		if _, ok := s.util[u.Member]; !ok {
			s.utilNames = insertName(s.utilNames, u.Member)
		}
		s.util[u.Member] = u.Value
	}
	if o.Fit != nil {
		f := *o.Fit
		s.fit = &f
	}
	for _, c := range o.Channels {
		if !c.WatchedSince.IsZero() {
			if _, ok := s.watched[c.Channel]; !ok {
				s.watchedNames = insertName(s.watchedNames, c.Channel)
			}
			s.watched[c.Channel] = c.WatchedSince
		}
		if !c.LastReading.IsZero() {
			if prev, ok := s.channels[c.Channel]; !ok || c.LastReading.After(prev) {
				if !ok {
					s.channelNames = insertName(s.channelNames, c.Channel)
				}
				s.channels[c.Channel] = c.LastReading
			}
		}
	}
	if o.Causes != nil {
		s.causes = o.Causes
	}
	if s.meanKeep > 0 {
		oldest := o.Time.Add(-s.meanKeep)
		for _, m := range o.Members {
			s.wSeen[m.Member] = o.Time
			if m.Restart {
				delete(s.wHist, m.Member) // a new series from this sample on
			}
			if m.Checkable {
				h := s.wHist[m.Member]
				if h == nil {
					h = &meanSeries{}
					s.wHist[m.Member] = h
				}
				h.add(o.Time, m.W, oldest)
			}
		}
		if o.Fit != nil && o.Fit.DOF > 0 {
			s.fitSeen = o.Time
			if s.fitHist == nil {
				s.fitHist = &meanSeries{}
			}
			s.fitHist.add(o.Time, FitScore(o.Fit.ChiSquare, o.Fit.DOF), oldest)
		}
	}
	keep := s.keep
	s.skew = appendSample(s.skew, sample{o.Time, float64(o.SkewCount)}, o.Time.Add(-keep))
	s.rej = appendSample(s.rej, sample{o.Time, float64(o.RejectCount)}, o.Time.Add(-keep))
	s.commitFail = appendSample(s.commitFail, sample{o.Time, float64(o.CommitFailures)}, o.Time.Add(-keep))
	s.recDrop = appendSample(s.recDrop, sample{o.Time, float64(o.ReconcileDropped)}, o.Time.Add(-keep))
	if o.BrokerConnected != nil {
		c := *o.BrokerConnected
		s.broker = &c
	}
}

// appendSample appends x to h (samples in time order, x not before the
// last) and drops the samples before oldest once they are more than half of
// those held (dropCount), so that dropping costs a constant per sample.
func appendSample(h []sample, x sample, oldest time.Time) []sample {
	h = append(h, x)
	if len(h) < 3 || !h[len(h)/2].t.Before(oldest) {
		return h
	}
	drop := min(len(h)-1, sort.Search(len(h), func(i int) bool { return !h[i].t.Before(oldest) }))
	return append(h[:0], h[drop:]...)
}

// dropCount returns how many leading samples of times (in time order) to
// drop: those before oldest, but never the last one, and none until they
// are more than half of the samples. The check is on the middle sample, so
// it costs a constant until samples are dropped.
func dropCount(times []time.Time, oldest time.Time) int {
	if len(times) < 3 || !times[len(times)/2].Before(oldest) {
		return 0
	}
	return min(len(times)-1, sort.Search(len(times), func(i int) bool { return !times[i].Before(oldest) }))
}

// increase returns counter(t) - counter(t - w), the old value being the
// latest sample in [t - w - Lookback, t - w], or 0 without one.
func increase(h []sample, t time.Time, w time.Duration) float64 {
	cur := h[len(h)-1].v
	ref := t.Add(-w)
	lo := ref.Add(-Lookback)
	base := 0.0
	for i := len(h) - 1; i >= 0; i-- {
		if h[i].t.After(ref) {
			continue
		}
		if !h[i].t.Before(lo) {
			base = h[i].v
		}
		break
	}
	return cur - base
}

// instance is one subject's signal value at this evaluation.
type instance struct {
	subject string
	value   float64
	ok      bool // the signal has a value
	// Mean rules: n epochs in the for-duration; hold is the mean over the
	// hold-off with nHold epochs, measured whether the subject had any
	// epoch at all in the hold-off.
	n, nHold int
	hold     float64
	measured bool
	// series is the subject's statistic (mean rules; nil without one):
	// value, n, hold and nHold are filled from it only for an event
	// (exactMeans), the decisions use meanAbove.
	series *meanSeries
}

// FitScore is the Wilson-Hilferty normal score of a chi-square statistic
// t with dof degrees of freedom (see SignalFitZ).
func FitScore(t float64, dof int) float64 {
	nu := float64(dof)
	v := 2 / (9 * nu)
	return (math.Cbrt(t/nu) - (1 - v)) / math.Sqrt(v)
}

// meanInstance is a mean rule's instance for one subject before its means
// are taken: measured is whether the subject had any epoch in the last
// Hold.
func meanInstance(r Rule, subject string, h *meanSeries, seen time.Time, t time.Time) instance {
	return instance{subject: subject, series: h, measured: !seen.IsZero() && !seen.Before(t.Add(-r.Hold))}
}

// exactMeans fills a mean rule's instance with the means over For and
// Hold, summed afresh (an event's evidence).
func (in *instance) exactMeans(r Rule, t time.Time) {
	m, n := in.series.mean(t, r.For)
	mh, nh := in.series.mean(t, r.Hold)
	if r.Signal == SignalAbsW {
		m, mh = math.Abs(m), math.Abs(mh)
	}
	in.value, in.n, in.ok = m, n, n > 0
	in.hold, in.nHold = mh, nh
}

// instances lists the rule's subjects with their values: every subject
// seen so far, plus those with an alarm state.
func (s *structState) instances(r Rule, t time.Time) []instance {
	// The buffer of the previous call: its instances were used up.
	out := s.instBuf[:0]
	defer func() { s.instBuf = out[:0] }()
	switch {
	case r.Mean && r.Signal == SignalAbsW:
		for _, name := range s.memberNames {
			out = append(out, meanInstance(r, name, s.wHist[name], s.wSeen[name], t))
		}
	case r.Mean && r.Signal == SignalFitZ:
		if !s.fitSeen.IsZero() {
			out = append(out, meanInstance(r, "", s.fitHist, s.fitSeen, t))
		}
	}
	switch {
	case r.Mean:
	case r.Signal == SignalAbsW:
		for _, name := range s.memberNames {
			m := s.members[name]
			w := m.W
			if w < 0 {
				w = -w
			}
			out = append(out, instance{subject: name, value: w, ok: m.Checkable})
		}
	case r.Signal == SignalUtilisation:
		for _, name := range s.utilNames {
			out = append(out, instance{subject: name, value: s.util[name], ok: true})
		}
	case r.Signal == SignalSilence:
		// Since the last reading; for a channel without one, since it is
		// watched (the PromQL: last reading "or" watched since).
		for _, name := range s.channelNames {
			out = append(out, instance{subject: name, value: t.Sub(s.channels[name]).Seconds(), ok: true})
		}
		for _, name := range s.watchedNames {
			if _, ok := s.channels[name]; !ok {
				out = append(out, instance{subject: name, value: t.Sub(s.watched[name]).Seconds(), ok: true})
			}
		}
	case r.Signal == SignalPValue:
		if s.fit != nil {
			out = append(out, instance{subject: "", value: s.fit.PValue, ok: true})
		}
	case r.Signal == SignalSkewIncrease:
		out = append(out, instance{subject: "", value: increase(s.skew, t, r.Window), ok: true})
	case r.Signal == SignalRejectIncrease:
		out = append(out, instance{subject: "", value: increase(s.rej, t, r.Window), ok: true})
	case r.Signal == SignalCommitFailIncrease:
		out = append(out, instance{subject: "", value: increase(s.commitFail, t, r.Window), ok: true})
	case r.Signal == SignalReconcileDropIncrease:
		out = append(out, instance{subject: "", value: increase(s.recDrop, t, r.Window), ok: true})
	case r.Signal == SignalBrokerConnected:
		if s.broker != nil {
			v := 0.0
			if *s.broker {
				v = 1
			}
			out = append(out, instance{subject: "", value: v, ok: true})
		}
	}
	// The subjects with an alarm state but no value now (the lists above
	// are in name order, so a binary search finds the others).
	listed := len(out)
	for k := range s.alarms {
		if k.rule != r.Name {
			continue
		}
		if _, found := slices.BinarySearchFunc(out[:listed], k.subject, func(in instance, subject string) int {
			return strings.Compare(in.subject, subject)
		}); !found && !slices.ContainsFunc(out[:listed], func(in instance) bool { return in.subject == k.subject }) {
			out = append(out, instance{subject: k.subject})
		}
	}
	// Subjects are unique, so name order is one order whatever the sort.
	bySubject := func(a, b instance) int { return strings.Compare(a.subject, b.subject) }
	if !slices.IsSortedFunc(out, bySubject) {
		slices.SortFunc(out, bySubject)
	}
	return out
}

// evaluate advances the alarm states of rule r (the state machine of a
// Prometheus alerting rule with the clearing expression of promql.go):
//
//	inactive -> pending   when raised(v)
//	pending  -> inactive  when not raised(v)
//	pending  -> firing    when raised(v) and t - activeAt >= For   (event "raised")
//	firing   -> inactive  when neither raised(v) nor held(v)      (event "cleared")
func (s *structState) evaluate(r Rule, o Observation, events []Event) []Event {
	if r.Mean {
		return s.evaluateMean(r, o, events)
	}
	t := o.Time
	for _, in := range s.instances(r, t) {
		key := alarmKey{r.Name, in.subject}
		a := s.alarms[key]
		raise := in.ok && r.raised(in.value)
		hold := in.ok && r.held(in.value)
		if a == nil {
			if !raise {
				continue
			}
			a = &alarmState{}
			s.alarms[key] = a
		}
		switch {
		case a.firing:
			if !raise && !hold {
				events = s.clear(r, o, in, a, events)
				delete(s.alarms, key)
				s.firingCount[r.Name]--
			}
		case a.pending:
			if !raise {
				delete(s.alarms, key)
			}
		default:
			a.pending, a.activeAt = true, t
		}
		if a.pending && !a.firing && raise && t.Sub(a.activeAt) >= r.For {
			a.firing, a.fired = true, t
			s.firingCount[r.Name]++
			a.raised = s.event(r, o, in, Raised, a)
			a.causesAt, a.storedAt = a.raised.Evidence.CausesAt, a.raised.Evidence.CausesAt
			events = append(events, a.raised.clone())
		}
	}
	return events
}

// clear appends the cleared event of alarm a, preceded (in the revisions
// for the sink) by its raised event's latest revision when that was not
// stored yet.
func (s *structState) clear(r Rule, o Observation, in instance, a *alarmState, events []Event) []Event {
	if a.causesAt.After(a.storedAt) {
		a.storedAt = a.causesAt
		s.revisions = append(s.revisions, a.raised.clone())
	}
	return append(events, s.event(r, o, in, Cleared, a))
}

// suppressed reports whether an alarm of r.SuppressedBy fires on subject
// (same scope) or on any subject (different scopes).
func (s *structState) suppressed(r Rule, subject string) bool {
	var by *Rule
	for i := range s.rules {
		if s.rules[i].Name == r.SuppressedBy {
			by = &s.rules[i]
		}
	}
	if by == nil {
		return false
	}
	if by.Signal.Scope() == r.Signal.Scope() {
		a := s.alarms[alarmKey{by.Name, subject}]
		return a != nil && a.firing
	}
	return s.firingCount[by.Name] > 0
}

// evaluateMean advances the alarm states of a mean rule:
//
//	inactive -> firing    when mean over For > MeanThreshold(Raise, ZRaise, n)   (event "raised")
//	firing   -> inactive  when the subject was measured in the last Hold, and
//	                      neither the raise condition holds nor the mean over
//	                      Hold exceeds MeanThreshold(Clear, ZClear, nHold)        (event "cleared")
//
// A subject not measured at all in the last Hold keeps its alarm.
func (s *structState) evaluateMean(r Rule, o Observation, events []Event) []Event {
	t := o.Time
	abs := r.Signal == SignalAbsW
	for _, in := range s.instances(r, t) {
		key := alarmKey{r.Name, in.subject}
		a := s.alarms[key]
		if a == nil {
			if r.SuppressedBy != "" && s.suppressed(r, in.subject) {
				continue
			}
			if r.DeferAbove > 0 && abs {
				if m, ok := s.members[in.subject]; ok && m.Checkable && math.Abs(m.W) > r.DeferAbove {
					continue
				}
			}
			if raise, _ := in.series.meanAbove(t, r.For, r.Raise, r.ZRaise, abs); !raise {
				continue
			}
			in.exactMeans(r, t)
			a = &alarmState{pending: true, activeAt: t.Add(-r.For)}
			s.alarms[key] = a
			a.firing, a.fired = true, t
			s.firingCount[r.Name]++
			a.raised = s.event(r, o, in, Raised, a)
			a.causesAt, a.storedAt = a.raised.Evidence.CausesAt, a.raised.Evidence.CausesAt
			events = append(events, a.raised.clone())
			continue
		}
		if raise, _ := in.series.meanAbove(t, r.For, r.Raise, r.ZRaise, abs); raise || !in.measured {
			continue
		}
		if hold, _ := in.series.meanAbove(t, r.Hold, r.Clear, r.ZClear, abs); hold {
			continue
		}
		in.exactMeans(r, t)
		events = s.clear(r, o, in, a, events)
		delete(s.alarms, key)
		s.firingCount[r.Name]--
	}
	return events
}

func (s *structState) event(r Rule, o Observation, in instance, kind EventKind, a *alarmState) Event {
	ev := Event{Structure: o.Structure, Rule: r.Name, Subject: in.subject, Kind: kind, Time: o.Time}
	ev.Evidence = Evidence{Signal: r.Signal.String(), ActiveSince: a.activeAt, Threshold: r.Raise}
	if kind == Cleared {
		ev.Evidence.Threshold = r.Clear
	}
	if in.ok {
		ev.Evidence.Value = in.value
	}
	if r.Mean {
		ev.Evidence.Epochs = in.n
		ev.Evidence.Threshold = MeanThreshold(r.Raise, r.ZRaise, in.n)
		if kind == Cleared {
			ev.Evidence.Value, ev.Evidence.Epochs = in.hold, in.nHold
			ev.Evidence.Threshold = MeanThreshold(r.Clear, r.ZClear, in.nHold)
		}
	}
	causes := s.causes
	switch r.Signal {
	case SignalAbsW:
		m := s.members[in.subject]
		ev.Evidence.W = m.W
		ev.Evidence.Bias = m.EstimatedBias
		if len(m.Causes) > 0 {
			causes = m.Causes
		}
	case SignalPValue, SignalFitZ:
		if s.fit != nil {
			ev.Evidence.PValue = s.fit.PValue
			ev.Evidence.ChiSquare = s.fit.ChiSquare
			ev.Evidence.DOF = s.fit.DOF
		}
	default:
		causes = nil
	}
	ev.Evidence.Causes = append([]reconcile.RankedCause(nil), ShownCauses(causes)...)
	if kind == Raised && r.Signal.identifies() {
		ev.Evidence.CausesAt = o.Time
		if len(o.LoadShifts) > 0 {
			ev.Evidence.LoadShifts = append([]reconcile.LoadShift(nil), o.LoadShifts...)
		}
	}
	return ev
}

// identifies reports whether the events of a rule watching the signal
// carry identified causes (the statistical rules).
func (s Signal) identifies() bool {
	return s == SignalAbsW || s == SignalPValue || s == SignalFitZ
}

// String returns the signal's name.
func (s Signal) String() string {
	switch s {
	case SignalAbsW:
		return "abs_w"
	case SignalPValue:
		return "fit_p_value"
	case SignalSilence:
		return "seconds_since_last_reading"
	case SignalSkewIncrease:
		return "skewed_readings_in_window"
	case SignalRejectIncrease:
		return "rejections_in_window"
	case SignalUtilisation:
		return "utilisation"
	case SignalCommitFailIncrease:
		return "commit_failures_in_window"
	case SignalBrokerConnected:
		return "broker_connected"
	case SignalFitZ:
		return "fit_z"
	case SignalReconcileDropIncrease:
		return "reconcile_dropped_readings_in_window"
	}
	return fmt.Sprintf("signal(%d)", int(s))
}
