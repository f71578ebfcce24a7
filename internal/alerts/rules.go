// Package alerts defines the alarm rules once and uses them twice: it
// evaluates them in-process over the epoch stream (with the epoch's time as
// the clock, so a replay raises and clears alarms at the same times as live
// running did) and writes them as a Prometheus alerting-rules file over the
// metric names of internal/metrics.
//
// Every rule watches one signal (a number per member, channel or
// structure) and has three parts: a raise condition (signal beyond Raise),
// a for-duration (the raise condition must hold at every evaluation for
// that long before the alarm fires) and a clearing condition with
// hysteresis (a firing alarm stays while the signal is beyond Clear, a
// looser threshold, and clears at the first evaluation where it is not).
//
// This is a monitoring aid: an alarm, or its absence, does not establish
// that a structure is safe or unsafe; decisions rest with a licensed
// engineer under local codes.
package alerts

import (
	"fmt"
	"time"

	"trussmonitor/internal/reconcile"
)

// Signal names the quantity a rule watches.
type Signal int

// Signals.
const (
	// SignalAbsW is |w| of a checkable gauged member (members that cannot
	// be checked have no value and never alarm).
	SignalAbsW Signal = iota + 1
	// SignalPValue is the p-value of the global chi-square test.
	SignalPValue
	// SignalSilence is the time since a channel's last reading, seconds.
	SignalSilence
	// SignalSkewIncrease is the number of clock-skewed readings counted in
	// the last Window (counter now minus counter Window ago).
	SignalSkewIncrease
	// SignalRejectIncrease is the number of ingest rejections (dead
	// letters) counted in the last Window.
	SignalRejectIncrease
	// SignalUtilisation is a member's utilisation, |total force| / design
	// resistance (members of a structure with a design basis only).
	SignalUtilisation
	// SignalCommitFailIncrease is the number of failed store commits of
	// received messages counted in the last Window (one ingest serves every
	// structure of an instance; each counts it).
	SignalCommitFailIncrease
	// SignalBrokerConnected is 1 while ingest is connected to the broker
	// and subscribed, 0 while not (no value in replay).
	SignalBrokerConnected
)

// lastSignal is the highest valid signal.
const lastSignal = SignalBrokerConnected

// Scope is what one instance of a rule is about.
type Scope int

// Scopes.
const (
	ScopeStructure Scope = iota + 1
	ScopeMember
	ScopeChannel
)

// Scope returns the scope of the signal.
func (s Signal) Scope() Scope {
	switch s {
	case SignalAbsW, SignalUtilisation:
		return ScopeMember
	case SignalSilence:
		return ScopeChannel
	}
	return ScopeStructure
}

// The monitor's rule names (the Prometheus alert names and the rule of a
// stored event). Code outside this package names a rule by these constants,
// never by a string literal.
const (
	RuleMemberDiverging = "MemberDiverging"
	RuleFitRejected     = "FitRejected"
	RuleChannelSilent   = "ChannelSilent"
	RuleClockSkew       = "ClockSkew"
	RuleIngestRejects   = "IngestRejects"
	RuleCommitsFailing  = "CommitsFailing"
	RuleBrokerDown      = "BrokerDisconnected"
)

// counting reports whether the signal is a counter's increase in a window.
func (s Signal) counting() bool {
	return s == SignalSkewIncrease || s == SignalRejectIncrease || s == SignalCommitFailIncrease
}

// Rule is one alarm rule.
type Rule struct {
	Name     string // alert name, one of the Rule... constants
	Signal   Signal
	Severity string // "critical", "warning" or "info"
	// Below selects the direction: the alarm is raised when the signal is
	// above Raise (false) or below Raise (true), and held while it is above
	// (below) Clear.
	Below  bool
	Raise  float64
	Clear  float64
	For    time.Duration
	Window time.Duration // counting window of the increase signals
	// Summary and Description are the alert's annotations; they may use
	// {{ $labels.structure }}, {{ $labels.member }}, {{ $labels.channel }}.
	Summary     string
	Description string
}

// raised reports whether value meets the raise condition.
func (r Rule) raised(v float64) bool {
	if r.Below {
		return v < r.Raise
	}
	return v > r.Raise
}

// held reports whether value keeps a firing alarm firing.
func (r Rule) held(v float64) bool {
	if r.Below {
		return v < r.Clear
	}
	return v > r.Clear
}

// Validate checks a rule's fields.
func (r Rule) Validate() error {
	if r.Name == "" {
		return fmt.Errorf("alerts: rule without a name")
	}
	for _, c := range r.Name {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_') {
			return fmt.Errorf("alerts: rule %q: name may hold only letters, digits and '_'", r.Name)
		}
	}
	if r.Signal < SignalAbsW || r.Signal > lastSignal {
		return fmt.Errorf("alerts: rule %s: unknown signal %d", r.Name, r.Signal)
	}
	if r.For < 0 || r.For%time.Second != 0 {
		return fmt.Errorf("alerts: rule %s: for-duration %v; want whole seconds >= 0", r.Name, r.For)
	}
	if r.Signal.counting() && (r.Window <= 0 || r.Window%time.Second != 0) {
		return fmt.Errorf("alerts: rule %s: counting window %v; want whole seconds > 0", r.Name, r.Window)
	}
	if r.Below && r.Clear < r.Raise || !r.Below && r.Clear > r.Raise {
		return fmt.Errorf("alerts: rule %s: clearing threshold %v is stricter than the raise threshold %v; hysteresis needs it looser (or equal)", r.Name, r.Clear, r.Raise)
	}
	return nil
}

// Defaults of DefaultRules.
const (
	// SilentAfter: a channel with no reading for longer than this is
	// silent. Loggers publish every second or so; two minutes rides out a
	// broker reconnect without alarming (common practice).
	SilentAfter = 2 * time.Minute
	// DivergingFor and RejectedFor: a statistical alarm must persist for
	// two minutes of epochs, so a single unlucky epoch (the w-test's false
	// alarm rate is 0.001 per member and epoch) or a passing vehicle or
	// crowd transient does not raise it.
	DivergingFor = 2 * time.Minute
	RejectedFor  = 2 * time.Minute
	// CountWindow is the window of the counting rules.
	CountWindow = 5 * time.Minute
	// RejectsRaise and RejectsClear: more than 10 dead letters in 5 minutes
	// (2 a minute) raises; it clears when at most 2 arrived in 5 minutes.
	RejectsRaise = 10
	RejectsClear = 2
	// UtilisationRaise and UtilisationClear: a member whose total force
	// reaches 90 % of its design resistance for UtilisationFor raises a
	// warning; it clears below 85 %. The margin leaves room for the model's
	// and the gauges' uncertainty before the resistance itself is reached
	// (common practice for a warning level; the owner's engineer may set
	// another).
	UtilisationRaise = 0.90
	UtilisationClear = 0.85
	UtilisationFor   = 2 * time.Minute
	// DisconnectedFor: the broker connection must be down for a minute
	// before BrokerDisconnected fires, so that a reconnect after a broker
	// restart (seconds) does not raise it (common practice).
	DisconnectedFor = time.Minute
)

// RuleUtilisationHigh is the name of the utilisation rule.
const RuleUtilisationHigh = "MemberUtilisationHigh"

// DefaultRules returns the monitor's rules with the thresholds of the
// reconcile defaults:
//
//   - MemberDiverging: |w| > k(alpha0 = 0.001) = 3.29 (Baarda's critical
//     value) for 2 minutes; clears when |w| <= k(0.01) = 2.58, the member
//     no longer significant at the 1 % level.
//   - FitRejected: global test p-value < 0.001 (reconcile.DefaultAlphaGlobal)
//     for 2 minutes; clears when p >= 0.01.
//   - ChannelSilent: no reading for more than 2 minutes.
//   - ClockSkew: any skewed reading in the last 5 minutes.
//   - IngestRejects: more than 10 rejections in 5 minutes; clears at <= 2.
//   - MemberUtilisationHigh: utilisation > 0.90 for 2 minutes; clears at
//     <= 0.85 (structures with a design basis only).
//   - CommitsFailing: any failed store commit of received messages in the
//     last 5 minutes (nothing received is acknowledged or processed until
//     its commit succeeds).
//   - BrokerDisconnected: ingest not connected and subscribed for 1 minute.
func DefaultRules() ([]Rule, error) {
	kRaise, err := reconcile.CriticalW(reconcile.DefaultAlpha0)
	if err != nil {
		return nil, err
	}
	kClear, err := reconcile.CriticalW(0.01)
	if err != nil {
		return nil, err
	}
	caution := " This is a monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes."
	rules := []Rule{
		{
			Name: RuleMemberDiverging, Signal: SignalAbsW, Severity: "critical",
			Raise: kRaise, Clear: kClear, For: DivergingFor,
			Summary:     "Member {{ $labels.member }} of {{ $labels.structure }} strays from the model prediction",
			Description: "Baarda's w statistic of the member's adjusted residual exceeds the critical value; a gauge fault, a stiffness change or an unmodelled load near the member. See the ranked causes in the event log." + caution,
		},
		{
			Name: RuleFitRejected, Signal: SignalPValue, Severity: "warning", Below: true,
			Raise: reconcile.DefaultAlphaGlobal, Clear: 0.01, For: RejectedFor,
			Summary:     "Measured member forces of {{ $labels.structure }} do not fit the model",
			Description: "The global chi-square test of the weighted least-squares fit rejects; see the ranked causes in the event log." + caution,
		},
		{
			Name: RuleChannelSilent, Signal: SignalSilence, Severity: "warning",
			Raise: SilentAfter.Seconds(), Clear: SilentAfter.Seconds(),
			Summary:     "Channel {{ $labels.channel }} of {{ $labels.structure }} has not reported",
			Description: "No reading from the channel for more than the silence limit; check the logger, the sensor cable and the broker connection.",
		},
		{
			Name: RuleClockSkew, Signal: SignalSkewIncrease, Severity: "warning",
			Raise: 0, Clear: 0, Window: CountWindow,
			Summary:     "Logger clock of {{ $labels.structure }} is skewed",
			Description: "Readings arrived with time stamps too far from the receive time; check the logger's time synchronisation.",
		},
		{
			Name: RuleIngestRejects, Signal: SignalRejectIncrease, Severity: "warning",
			Raise: RejectsRaise, Clear: RejectsClear, Window: CountWindow,
			Summary:     "Ingest of {{ $labels.structure }} rejects payloads",
			Description: "More payloads than the limit were rejected (dead letters) in the counting window; see the dead-letter table for the reasons.",
		},
		{
			Name: RuleUtilisationHigh, Signal: SignalUtilisation, Severity: "warning",
			Raise: UtilisationRaise, Clear: UtilisationClear, For: UtilisationFor,
			Summary:     "Member {{ $labels.member }} of {{ $labels.structure }} is near its design resistance",
			Description: "The member's total axial force (zero-state force plus the measured change, or the reconciled prediction) exceeds the stated share of its design resistance (EN 1993-1-1 or AISC 360-16, tension or flexural buckling). Utilisation is a monitoring estimate, not a design check or an assessment; assessment rests with a licensed engineer under local codes.",
		},
		{
			Name: RuleCommitsFailing, Signal: SignalCommitFailIncrease, Severity: "critical",
			Raise: 0, Clear: 0, Window: CountWindow,
			Summary:     "The monitor cannot store readings of {{ $labels.structure }}",
			Description: "Store commits of received messages failed in the counting window (disk full, database locked or damaged); readings wait unacknowledged at the broker and no epoch is processed until a commit succeeds. See the service log for the error.",
		},
		{
			Name: RuleBrokerDown, Signal: SignalBrokerConnected, Severity: "critical", Below: true,
			Raise: 1, Clear: 1, For: DisconnectedFor,
			Summary:     "The monitor of {{ $labels.structure }} is not connected to the MQTT broker",
			Description: "Ingest has not been connected and subscribed to the broker for the for-duration; no reading arrives. See the service log for the connection error (address, credentials, certificate).",
		},
	}
	for _, r := range rules {
		if err := r.Validate(); err != nil {
			return nil, err
		}
	}
	return rules, nil
}
