// Package metrics exports the monitor's state as Prometheus metrics on a
// registry passed in (never the default registry): member forces and test
// statistics per epoch, fit statistics, estimated unknown loads, counters
// of epochs and ingest outcomes, channel freshness, epoch latency and alarm
// state, plus the HTTP handlers /metrics, /healthz and /readyz.
//
// Names carry the shm_ prefix and base units (newtons, seconds); counters
// end in _total. Labels are limited to structure, member, channel,
// pattern, outcome, reason (rejections only) and rule (alarm state only).
package metrics

import (
	"fmt"
	"math"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// Metric names, shared with the alerting rules (internal/alerts).
const (
	MemberMeasured       = "shm_member_force_measured_newtons"
	MemberPredicted      = "shm_member_force_predicted_newtons"
	MemberResidual       = "shm_member_residual_newtons"
	MemberW              = "shm_member_w_statistic"
	MemberMDB            = "shm_member_mdb_newtons"
	MemberRedundancy     = "shm_member_redundancy"
	MemberCheckable      = "shm_member_checkable"
	FitChiSquare         = "shm_fit_chi_square"
	FitDOF               = "shm_fit_degrees_of_freedom"
	FitPValue            = "shm_fit_p_value"
	UnknownLoad          = "shm_unknown_load_factor"
	UnknownLoadStdDev    = "shm_unknown_load_factor_stddev"
	Epochs               = "shm_epochs_total"
	IngestMessages       = "shm_ingest_messages_total"
	IngestReadings       = "shm_ingest_readings_total"
	IngestRejections     = "shm_ingest_rejections_total"
	ClockSkewReadings    = "shm_clock_skew_readings_total"
	ChannelLastReading   = "shm_channel_last_reading_timestamp_seconds"
	EpochDuration        = "shm_epoch_processing_seconds"
	AlarmsFiring         = "shm_alarms_firing"
	BrokerDroppedMessage = "shm_broker_dropped_messages_total"
	DeadLettersDropped   = "shm_dead_letters_dropped_total"
	ChannelWatchedSince  = "shm_channel_watched_since_timestamp_seconds"
	CommitFailures       = "shm_ingest_commit_failures_total"
	BrokerConnected      = "shm_broker_connected"
	BrokerReconnects     = "shm_broker_reconnects_total"
	// EmbeddedBrokerClients is the MQTT clients connected to the embedded
	// broker (the loggers and the monitor's own ingest); only exported
	// when the service runs the embedded broker.
	EmbeddedBrokerClients = "shm_embedded_broker_clients"
	// ReconcileQueueDepth is the readings waiting for reconciliation,
	// ReconcileQueueOverflow those that found its queue full (read back
	// from the store later) and ReconcileQueueDropped those left out of
	// live reconciliation (the read-back failed).
	ReconcileQueueDepth    = "shm_reconcile_queue_readings"
	ReconcileQueueOverflow = "shm_reconcile_queue_overflow_readings_total"
	ReconcileQueueDropped  = "shm_reconcile_queue_dropped_readings_total"
)

// RegisterEmbeddedBroker exports the embedded broker's connected clients
// (EmbeddedBrokerClients), read from clients at every scrape: a logger that
// stopped publishing but is still connected differs from one that lost its
// connection.
func RegisterEmbeddedBroker(reg prometheus.Registerer, clients func() int64) error {
	g := prometheus.NewGaugeFunc(prometheus.GaugeOpts{Name: EmbeddedBrokerClients,
		Help: "MQTT clients connected to the embedded broker (the loggers and the monitor's own ingest)."},
		func() float64 { return float64(clients()) })
	if err := reg.Register(g); err != nil {
		return fmt.Errorf("metrics: %s: %w", EmbeddedBrokerClients, err)
	}
	return nil
}

// Epoch outcomes for Metrics.Epoch (common values; any string is accepted).
const (
	EpochAccepted = "accepted" // fitted, global test passed
	EpochRejected = "rejected" // fitted, global test rejected
	EpochSkipped  = "skipped"  // not fitted (missing load channel, no gauges)
	EpochFailed   = "failed"   // fit impossible (unidentifiable unknowns)
)

// Metrics holds the collectors. Its methods are safe for concurrent use.
type Metrics struct {
	measured, predicted, residual, w, mdb, redund, checkable *prometheus.GaugeVec
	chi2, dof, pvalue                                        *prometheus.GaugeVec
	load, loadStd                                            *prometheus.GaugeVec
	epochs, messages, readings, rejections, skew             *prometheus.CounterVec
	lastReading, watchedSince                                *prometheus.GaugeVec
	latency                                                  *prometheus.HistogramVec
	alarms                                                   *prometheus.GaugeVec
	dropped                                                  prometheus.Counter
	state                                                    *stateVecs
	adapt                                                    *adaptVecs
	loads                                                    *loadVecs
	deadDropped                                              prometheus.Counter
	commitFailures, reconnects                               *prometheus.CounterVec
	connected                                                *prometheus.GaugeVec
	queueDepth                                               *prometheus.GaugeVec
	queueDropped, queueOverflow                              *prometheus.CounterVec

	cMessages, cReadings, cRejections, cEpochs, cSkew *children[prometheus.Counter]
	cLatency                                          *children[prometheus.Observer]
	cAlarms                                           *children[prometheus.Gauge]
	cLast                                             *children[*lastReading]
}

// lastReading is a channel's freshness gauge with the latest time stamp
// seen, so that a late reading does not move it back.
type lastReading struct {
	mu sync.Mutex
	t  float64
	g  prometheus.Gauge
}

// New creates the collectors and registers them on reg.
func New(reg prometheus.Registerer) (*Metrics, error) {
	if reg == nil {
		return nil, fmt.Errorf("metrics: no registry given; pass prometheus.NewRegistry() (the default registry is not used)")
	}
	sm := []string{"structure", "member"}
	st := []string{"structure"}
	g := func(name, help string, labels []string) *prometheus.GaugeVec {
		return prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: name, Help: help}, labels)
	}
	c := func(name, help string, labels []string) *prometheus.CounterVec {
		return prometheus.NewCounterVec(prometheus.CounterOpts{Name: name, Help: help}, labels)
	}
	m := &Metrics{
		measured:   g(MemberMeasured, "Measured change of the gauged member's axial force since its gauges' zero reading, last epoch (tension positive), newtons; the total is shm_member_force_total_newtons.", sm),
		predicted:  g(MemberPredicted, "Change of the gauged member's axial force since the zero reading predicted by the model under the recorded and estimated loads, newtons.", sm),
		residual:   g(MemberResidual, "Residual r = measured - predicted member force, newtons.", sm),
		w:          g(MemberW, "Baarda's w statistic of the member's adjusted residual (standard normal without a fault); while an alarm's identified causes are carried in the fit, that of the adapted fit (the alarm's own member keeps its nominal w), see "+MemberWNominal+".", sm),
		mdb:        g(MemberMDB, "Minimal detectable bias of the member's gauge, newtons (0 when the member cannot be checked at all).", sm),
		redund:     g(MemberRedundancy, "Redundancy number r_i of the gauged member (0 to 1).", sm),
		checkable:  g(MemberCheckable, "1 when the member's redundancy allows its w-test to alarm, else 0.", sm),
		chi2:       g(FitChiSquare, "Global test statistic e^T W e of the last fitted epoch.", st),
		dof:        g(FitDOF, "Degrees of freedom of the global test (available gauges - estimated unknowns).", st),
		pvalue:     g(FitPValue, "P-value of the global chi-square test of the last fitted epoch.", st),
		load:       g(UnknownLoad, "Estimated magnitude of an unknown load pattern, as a multiple of the pattern defined in the structure file.", []string{"structure", "pattern"}),
		loadStd:    g(UnknownLoadStdDev, "Standard deviation of the estimated unknown load magnitude, same unit as shm_unknown_load_factor.", []string{"structure", "pattern"}),
		epochs:     c(Epochs, "Epochs processed, by outcome.", []string{"structure", "outcome"}),
		messages:   c(IngestMessages, "MQTT messages handled by ingest, by outcome.", []string{"structure", "outcome"}),
		readings:   c(IngestReadings, "Readings handled by ingest, by outcome.", []string{"structure", "outcome"}),
		rejections: c(IngestRejections, "Rejected payloads (dead letters), by reason.", []string{"structure", "reason"}),
		skew:       c(ClockSkewReadings, "Readings whose logger time stamp was too far from the receive time (clock skew).", st),
		lastReading: g(ChannelLastReading, "Logger time stamp of the channel's last stored reading, seconds since 1970.",
			[]string{"structure", "channel"}),
		watchedSince: g(ChannelWatchedSince, "Receiver time at which the service began watching the channel (its start), seconds since 1970; a channel with no reading is silent since then.",
			[]string{"structure", "channel"}),
		latency: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    EpochDuration,
			Help:    "Time to process one epoch (prediction, fit, tests, alarms), seconds.",
			Buckets: prometheus.ExponentialBuckets(10e-6, 4, 9), // 10 us .. 0.66 s
		}, st),
		alarms:  g(AlarmsFiring, "Number of alarms of the rule currently firing.", []string{"structure", "rule"}),
		dropped: prometheus.NewCounter(prometheus.CounterOpts{Name: BrokerDroppedMessage, Help: "Messages the embedded broker dropped (in-flight or queue limits)."}),
		state:   newStateVecs(),
		adapt:   newAdaptVecs(),
		loads:   newLoadVecs(),
		deadDropped: prometheus.NewCounter(prometheus.CounterOpts{Name: DeadLettersDropped,
			Help: "Oldest dead letters deleted to keep the dead-letter table under its row cap."}),
		commitFailures: c(CommitFailures, "Failed store commits of received messages (each retried; nothing is acknowledged before its commit), counted for every structure of the instance.", st),
		reconnects:     c(BrokerReconnects, "Connections to the MQTT broker after the first (each follows a lost connection), for every structure of the instance.", st),
		connected:      g(BrokerConnected, "1 while the ingest of the structure's instance is connected to the MQTT broker and subscribed, else 0.", st),
		queueDepth:     g(ReconcileQueueDepth, "Committed readings waiting for the structure's reconciliation: held in its queue, or to be read back from the store after the queue was full.", st),
		queueOverflow:  c(ReconcileQueueOverflow, "Committed readings that found the reconciliation queue full; they are read back from the store when reconciliation reaches them.", st),
		queueDropped:   c(ReconcileQueueDropped, "Committed readings left out of live reconciliation because reading them back from the store failed; they are stored, and monitor replay recomputes their epochs.", st),
	}
	two := func(v *prometheus.CounterVec) *children[prometheus.Counter] {
		return newChildren(func(a, b string) prometheus.Counter { return v.WithLabelValues(a, b) })
	}
	m.cMessages, m.cReadings, m.cRejections, m.cEpochs = two(m.messages), two(m.readings), two(m.rejections), two(m.epochs)
	m.cSkew = newChildren(func(a, _ string) prometheus.Counter { return m.skew.WithLabelValues(a) })
	m.cLatency = newChildren(func(a, _ string) prometheus.Observer { return m.latency.WithLabelValues(a) })
	m.cAlarms = newChildren(func(a, b string) prometheus.Gauge { return m.alarms.WithLabelValues(a, b) })
	m.cLast = newChildren(func(a, b string) *lastReading {
		return &lastReading{t: math.Inf(-1), g: m.lastReading.WithLabelValues(a, b)}
	})
	for _, col := range append([]prometheus.Collector{m.measured, m.predicted, m.residual, m.w, m.mdb, m.redund, m.checkable,
		m.chi2, m.dof, m.pvalue, m.load, m.loadStd, m.epochs, m.messages, m.readings, m.rejections, m.skew,
		m.lastReading, m.watchedSince, m.latency, m.alarms, m.dropped, m.deadDropped, m.commitFailures, m.reconnects, m.connected,
		m.queueDepth, m.queueOverflow, m.queueDropped}, append(append(m.state.collectors(), m.loads.collectors()...), m.adapt.collectors()...)...) {
		if err := reg.Register(col); err != nil {
			return nil, fmt.Errorf("metrics: registering collectors: %w (is a second Metrics registered on the same registry?)", err)
		}
	}
	return m, nil
}

// children caches the children of one vector by their label values:
// WithLabelValues hashes the labels on every call (~180 ns), a cached
// child is a map lookup under a read lock.
type children[T any] struct {
	mu   sync.RWMutex
	m    map[[2]string]T
	make func(a, b string) T
}

func newChildren[T any](make func(a, b string) T) *children[T] {
	return &children[T]{m: map[[2]string]T{}, make: make}
}

func (c *children[T]) get(a, b string) T {
	k := [2]string{a, b}
	c.mu.RLock()
	v, ok := c.m[k]
	c.mu.RUnlock()
	if ok {
		return v
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	if v, ok = c.m[k]; !ok {
		v = c.make(a, b)
		c.m[k] = v
	}
	return v
}

// MessageHandled counts one MQTT message (ingest.Observer).
func (m *Metrics) MessageHandled(structure, outcome string) {
	m.cMessages.get(structure, outcome).Inc()
}

// ReadingsHandled counts n readings (ingest.Observer).
func (m *Metrics) ReadingsHandled(structure, outcome string, n int) {
	if n > 0 {
		m.cReadings.get(structure, outcome).Add(float64(n))
	}
}

// Rejected counts one dead letter (ingest.Observer).
func (m *Metrics) Rejected(structure, reason string) {
	m.cRejections.get(structure, reason).Inc()
}

// LastReading records the time stamp of a channel's latest reading
// (ingest.Observer). An older time stamp than the one shown (a late
// reading) does not move it back.
func (m *Metrics) LastReading(structure, channel string, t time.Time) {
	l := m.cLast.get(structure, channel)
	v := float64(t.UnixNano()) / 1e9
	l.mu.Lock()
	if v > l.t {
		l.t = v
		l.g.Set(v)
	}
	l.mu.Unlock()
}

// WatchedSince records when the service began watching a channel.
func (m *Metrics) WatchedSince(structure, channel string, t time.Time) {
	m.watchedSince.WithLabelValues(structure, channel).Set(float64(t.UnixNano()) / 1e9)
}

// BrokerDropped counts n messages dropped by the embedded broker
// (ingest.Observer).
func (m *Metrics) BrokerDropped(n int) {
	if n > 0 {
		m.dropped.Add(float64(n))
	}
}

// DeadLettersDropped counts n dead letters dropped at the cap
// (ingest.Observer).
func (m *Metrics) DeadLettersDropped(n int) {
	if n > 0 {
		m.deadDropped.Add(float64(n))
	}
}

// IngestOf creates the ingest-state series of structure at their zero
// values (not connected, no failure, no reconnect), so that they exist from
// the start and a counter's increase is measured from 0.
func (m *Metrics) IngestOf(structure string) {
	m.commitFailures.WithLabelValues(structure)
	m.reconnects.WithLabelValues(structure)
	m.connected.WithLabelValues(structure).Set(0)
	m.queueDepth.WithLabelValues(structure).Set(0)
	m.queueOverflow.WithLabelValues(structure)
	m.queueDropped.WithLabelValues(structure)
}

// ReconcileQueue sets the number of readings of structure waiting for
// reconciliation.
func (m *Metrics) ReconcileQueue(structure string, n int) {
	m.queueDepth.WithLabelValues(structure).Set(float64(n))
}

// ReconcileOverflow counts n readings of structure that found its
// reconciliation queue full.
func (m *Metrics) ReconcileOverflow(structure string, n int) {
	if n > 0 {
		m.queueOverflow.WithLabelValues(structure).Add(float64(n))
	}
}

// ReconcileDropped counts n readings of structure left out of live
// reconciliation (reading them back from the store failed).
func (m *Metrics) ReconcileDropped(structure string, n int) {
	if n > 0 {
		m.queueDropped.WithLabelValues(structure).Add(float64(n))
	}
}

// CommitFailed counts one failed store commit for structure (one ingest
// serves every structure of an instance: the caller counts it for each).
func (m *Metrics) CommitFailed(structure string) { m.commitFailures.WithLabelValues(structure).Inc() }

// BrokerConnection records the broker connection state for structure:
// connected and subscribed (true), or lost (false); reconnect is true for a
// connection after the first.
func (m *Metrics) BrokerConnection(structure string, connected, reconnect bool) {
	if connected {
		m.connected.WithLabelValues(structure).Set(1)
		if reconnect {
			m.reconnects.WithLabelValues(structure).Inc()
		}
		return
	}
	m.connected.WithLabelValues(structure).Set(0)
}

// ClockSkew counts n readings with a skewed logger clock.
func (m *Metrics) ClockSkew(structure string, n int) {
	if n > 0 {
		m.cSkew.get(structure, "").Add(float64(n))
	}
}

// Epoch counts one epoch by outcome and records its processing time.
func (m *Metrics) Epoch(structure, outcome string, took time.Duration) {
	m.cEpochs.get(structure, outcome).Inc()
	m.cLatency.get(structure, "").Observe(took.Seconds())
}

// AlarmsFiring sets the number of firing alarms of rule.
func (m *Metrics) AlarmsFiring(structure, rule string, n int) {
	m.cAlarms.get(structure, rule).Set(float64(n))
}

// Structure returns the per-epoch gauges of one structure with its gauged
// members and unknown load patterns, children resolved once, so that an
// epoch's update costs a few nanoseconds per value.
func (m *Metrics) Structure(name string, members, patterns []string) *StructureMetrics {
	s := &StructureMetrics{members: append([]string(nil), members...), patterns: append([]string(nil), patterns...)}
	s.rows = make([]memberGauges, len(members))
	for i, mb := range members {
		s.rows[i] = memberGauges{
			measured:  m.measured.WithLabelValues(name, mb),
			predicted: m.predicted.WithLabelValues(name, mb),
			residual:  m.residual.WithLabelValues(name, mb),
			w:         m.w.WithLabelValues(name, mb),
			mdb:       m.mdb.WithLabelValues(name, mb),
			redund:    m.redund.WithLabelValues(name, mb),
			checkable: m.checkable.WithLabelValues(name, mb),
		}
	}
	s.load = make([]prometheus.Gauge, len(patterns))
	s.loadStd = make([]prometheus.Gauge, len(patterns))
	for j, p := range patterns {
		s.load[j] = m.load.WithLabelValues(name, p)
		s.loadStd[j] = m.loadStd.WithLabelValues(name, p)
	}
	s.chi2 = m.chi2.WithLabelValues(name)
	s.dof = m.dof.WithLabelValues(name)
	s.pvalue = m.pvalue.WithLabelValues(name)
	return s
}

// StructureMetrics are the cached per-epoch gauges of one structure.
type StructureMetrics struct {
	members, patterns []string
	rows              []memberGauges
	load, loadStd     []prometheus.Gauge
	chi2, dof, pvalue prometheus.Gauge
}

type memberGauges struct {
	measured, predicted, residual, w, mdb, redund, checkable prometheus.Gauge
}

// MemberValues are one gauged member's values in one epoch.
type MemberValues struct {
	Measured, Predicted, Residual float64 // newtons
	W                             float64
	MDB                           float64 // newtons
	Redundancy                    float64
	Checkable                     bool
}

// SetMember sets the values of gauged member i (the order given to
// Structure). A member that did not report in an epoch is simply not set:
// its series keep their last values, as the alarm evaluator assumes.
func (s *StructureMetrics) SetMember(i int, v MemberValues) error {
	if i < 0 || i >= len(s.rows) {
		return fmt.Errorf("metrics: member index %d out of range (%d gauged members)", i, len(s.rows))
	}
	r := &s.rows[i]
	r.measured.Set(v.Measured)
	r.predicted.Set(v.Predicted)
	r.residual.Set(v.Residual)
	r.w.Set(v.W)
	r.mdb.Set(v.MDB)
	r.redund.Set(v.Redundancy)
	c := 0.0
	if v.Checkable {
		c = 1
	}
	r.checkable.Set(c)
	return nil
}

// SetFit sets the global test of the epoch.
func (s *StructureMetrics) SetFit(chiSquare float64, dof int, pValue float64) {
	s.chi2.Set(chiSquare)
	s.dof.Set(float64(dof))
	s.pvalue.Set(pValue)
}

// SetUnknownLoad sets the estimate of unknown load pattern j and its
// standard deviation.
func (s *StructureMetrics) SetUnknownLoad(j int, value, std float64) error {
	if j < 0 || j >= len(s.load) {
		return fmt.Errorf("metrics: unknown load index %d out of range (%d patterns)", j, len(s.load))
	}
	s.load[j].Set(value)
	s.loadStd[j].Set(std)
	return nil
}
