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
// The statistical rules (Mean set) decide on the mean of the per-epoch
// statistic over the for-duration instead, so that the decision does not
// depend on the sampling rate (see MeanThreshold): the mean of n
// independent standard normal statistics is N(0, 1/n) without a fault and
// N(delta, 1/n) with one of non-centrality delta, so "mean over the
// duration above k" alarms on the same faults (delta above k) at every
// rate, with a noise that shrinks as the rate grows. They clear with
// hysteresis over a longer hold-off window and never while their subject
// is unmeasured.
//
// This is a monitoring aid: an alarm, or its absence, does not establish
// that a structure is safe or unsafe; decisions rest with a licensed
// engineer under local codes.
package alerts

import (
	"fmt"
	"math"
	"strconv"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"trussmonitor/internal/capacity"
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
	// SignalFitZ is the global test as a standard normal score: the
	// Wilson-Hilferty transform of the epoch's chi-square statistic T with
	// nu degrees of freedom, z = ((T/nu)^(1/3) - (1 - 2/(9 nu))) /
	// sqrt(2/(9 nu)) (Wilson and Hilferty 1931, from memory), N(0, 1) to
	// a good approximation without a fault, so that its mean over epochs
	// can be tested like a w statistic's.
	SignalFitZ
	// SignalReconcileDropIncrease is the number of committed readings left
	// out of live reconciliation (the reconciliation queue was full and
	// reading them back from the store failed) counted in the last Window.
	SignalReconcileDropIncrease
)

// lastSignal is the highest valid signal.
const lastSignal = SignalReconcileDropIncrease

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

// RuleName is the name of an alarm rule: the Prometheus alert name and the
// rule of an event.
type RuleName string

// The monitor's rule names (the Prometheus alert names and the rule of a
// stored event). Code outside this package names a rule by these constants,
// never by a string literal.
const (
	RuleMemberDiverging RuleName = "MemberDiverging"
	RuleFitRejected     RuleName = "FitRejected"
	RuleChannelSilent   RuleName = "ChannelSilent"
	RuleClockSkew       RuleName = "ClockSkew"
	RuleIngestRejects   RuleName = "IngestRejects"
	RuleCommitsFailing  RuleName = "CommitsFailing"
	RuleMemberShifted   RuleName = "MemberShifted"
	RuleBrokerDown      RuleName = "BrokerDisconnected"
	RuleReconcileDrops  RuleName = "ReconcileDropping"
)

// counting reports whether the signal is a counter's increase in a window.
func (s Signal) counting() bool {
	return s == SignalSkewIncrease || s == SignalRejectIncrease || s == SignalCommitFailIncrease || s == SignalReconcileDropIncrease
}

// Rule is one alarm rule.
type Rule struct {
	Name     RuleName // alert name, one of the Rule... constants
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
	// Mean makes the rule decide on the mean of the per-epoch signal (its
	// absolute value for a w statistic) over the last For: raised when it
	// exceeds MeanThreshold(Raise, ZRaise, n), n the number of epochs in
	// [t - For, t]; a firing alarm is held while the mean over the last
	// Hold exceeds MeanThreshold(Clear, ZClear, n), and while the subject
	// had no epoch at all in the last Hold (no clearing while unmeasured).
	// There is no pending state: the duration is inside the statistic.
	Mean           bool
	ZRaise, ZClear float64
	Hold           time.Duration
	// SuppressedBy names a rule whose firing alarm keeps this rule from
	// raising (one alarm per fault): on the same subject when both rules
	// have the same scope, on any subject of the structure otherwise.
	SuppressedBy RuleName
	// DeferAbove, when positive, keeps a mean rule over a member's |w| from
	// raising while the member's latest |w| exceeds it: a deviation that
	// large is the business of the rule with the short window (SuppressedBy),
	// which raises within its for-duration; without this the long window's
	// mean, crossing its low floor within seconds of a large step, raised
	// first and the fault showed as two alarms.
	DeferAbove float64
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
	if r.Mean {
		if r.Signal != SignalAbsW && r.Signal != SignalFitZ {
			return fmt.Errorf("alerts: rule %s: a mean rule needs a per-epoch statistic (abs_w or fit_z)", r.Name)
		}
		if r.For <= 0 || r.Hold < r.For || r.Hold%time.Second != 0 || r.Below {
			return fmt.Errorf("alerts: rule %s: a mean rule needs For > 0, a hold-off Hold >= For in whole seconds and an upper threshold", r.Name)
		}
		if r.ZRaise < 0 || r.ZClear < 0 || r.ZClear > r.ZRaise {
			return fmt.Errorf("alerts: rule %s: ZRaise %v, ZClear %v; want 0 <= ZClear <= ZRaise", r.Name, r.ZRaise, r.ZClear)
		}
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
	// HoldOff is the clearing window of the statistical rules: a firing
	// alarm clears only when the mean of its statistic over the last 10
	// minutes is back inside the clearing threshold, so a fault near the
	// threshold does not clear and re-raise with every noisy epoch.
	HoldOff = 10 * time.Minute
	// ShiftWindow is the window of MemberShifted, the alarm for small
	// persistent faults, and its hold-off.
	ShiftWindow = time.Hour
	// ShiftRaise and ShiftClear are the floors of MemberShifted: a
	// persistent shift of a member's w by half a standard deviation (an
	// eighth of the minimal detectable bias) raises, given enough epochs
	// to tell it from noise; it clears below half of that. The floor keeps
	// the alarm from reacting to the small, slow model errors every real
	// structure has (common practice); it was one standard deviation
	// until a 30 % stiffness loss of the footbridge's ungauged brace D4
	// (doubly braced panel 4) was measured to shift the mean w of the
	// gauged C4 by 0.55 to 0.6 only: it never alarmed
	// (TestWindowAlarmUngaugedBrace). A structure whose model errors
	// shift w by more than half a standard deviation over an hour needs
	// its model improved, or this floor raised in its rules.
	ShiftRaise = 0.5
	ShiftClear = 0.25
	// MeanFalseAlarm is the largest false-alarm probability of one
	// evaluation of one subject of a mean rule (two-sided for |w|,
	// one-sided for the fit), whatever the number of epochs in the window:
	// see MeanThreshold.
	MeanFalseAlarm = 1e-7
)

// RuleUtilisationHigh is the name of the utilisation rule.
const RuleUtilisationHigh RuleName = "MemberUtilisationHigh"

// MeanThreshold returns the threshold on the mean of n epochs' standard
// normal statistics: max(floor, z / sqrt(n)). Without a fault the mean is
// N(0, 1/n) (independent epochs), so it exceeds the threshold with
// probability P(|N(0,1)| > max(floor sqrt(n), z)) (one-sided for the fit
// score), at most MeanFalseAlarm when z = Phi^-1(1 - MeanFalseAlarm/2)
// (5.33; one-sided Phi^-1(1 - MeanFalseAlarm) = 5.20). With the floor k =
// 3.29 of MemberDiverging and a 2-minute window, n = 3 at 60 s sampling
// gives 2 P(Z > 5.70) = 1.2e-8 per evaluation (1.7e-5 per member-day), and
// n = 13 (10 s) or 121 (1 s) give far less: the for-duration decision has
// a false-alarm rate below 1e-4 per structure-day of 20 gauged members at
// every rate, while a bias of one MDB (mean w = delta0 = 4.13 > 3.29) is
// found at every rate (Baarda 1968 for delta0; from memory).
func MeanThreshold(floor, z float64, n int) float64 {
	if n <= 0 {
		return math.Inf(1)
	}
	return math.Max(floor, z/math.Sqrt(float64(n)))
}

// DefaultRules returns the monitor's rules with the thresholds of the
// reconcile defaults:
//
//   - MemberDiverging: the mean w over 2 minutes beyond
//     MeanThreshold(k(alpha0 = 0.001) = 3.29, 5.33, n) (Baarda's critical
//     value); clears when the mean over the 10-minute hold-off is within
//     k(0.01) = 2.58, the member no longer significant at the 1 % level.
//   - FitRejected: the mean fit score (SignalFitZ) over 2 minutes above
//     MeanThreshold(Phi^-1(1 - 0.001) = 3.09, 5.20, n) (the global test at
//     reconcile.DefaultAlphaGlobal); clears when the 10-minute mean is
//     below Phi^-1(0.99) = 2.33. It does not raise while a MemberDiverging
//     alarm of the structure fires (the fault is already alarmed).
//   - MemberShifted: the mean w over an hour beyond MeanThreshold(1, 5.33,
//     n): a small persistent fault that single epochs cannot show; clears
//     when the hour's mean is within MeanThreshold(0.5, 3.29, n). It does
//     not raise on a member whose MemberDiverging alarm is firing.
//   - ChannelSilent: no reading for more than 2 minutes.
//   - ClockSkew: any skewed reading in the last 5 minutes.
//   - IngestRejects: more than 10 rejections in 5 minutes; clears at <= 2.
//   - MemberUtilisationHigh: utilisation > 0.90 for 2 minutes; clears at
//     <= 0.85 (structures with a design basis only).
//   - CommitsFailing: any failed store commit of received messages in the
//     last 5 minutes (nothing received is acknowledged or processed until
//     its commit succeeds).
//   - BrokerDisconnected: ingest not connected and subscribed for 1 minute.
//   - ReconcileDropping: any committed reading left out of live
//     reconciliation in the last 5 minutes (its queue was full and reading
//     it back from the store failed): live results and alarms miss those
//     epochs until monitor replay recomputes them.
func DefaultRules() ([]Rule, error) {
	kRaise, err := reconcile.CriticalW(reconcile.DefaultAlpha0)
	if err != nil {
		return nil, err
	}
	kClear, err := reconcile.CriticalW(0.01)
	if err != nil {
		return nil, err
	}
	zTwo := distuv.UnitNormal.Quantile(1 - MeanFalseAlarm/2)
	zOne := distuv.UnitNormal.Quantile(1 - MeanFalseAlarm)
	zFit := distuv.UnitNormal.Quantile(1 - reconcile.DefaultAlphaGlobal)
	zFitClear := distuv.UnitNormal.Quantile(1 - 0.01)
	caution := " This is a monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes."
	rules := []Rule{
		{
			Name: RuleMemberDiverging, Signal: SignalAbsW, Severity: "critical",
			Raise: kRaise, Clear: kClear, For: DivergingFor, Mean: true, ZRaise: zTwo, Hold: HoldOff,
			Summary:     "Member {{ $labels.member }} of {{ $labels.structure }} strays from the model prediction",
			Description: "The mean of Baarda's w statistic of the member's adjusted residual over the for-duration exceeds the critical value; a gauge fault, a stiffness change or an unmodelled load near the member. See the cause groups in the event log." + caution,
		},
		{
			Name: RuleFitRejected, Signal: SignalFitZ, Severity: "warning",
			Raise: zFit, Clear: zFitClear, For: RejectedFor, Mean: true, ZRaise: zOne, Hold: HoldOff,
			SuppressedBy: RuleMemberDiverging,
			Summary:      "Measured member forces of {{ $labels.structure }} do not fit the model",
			Description:  "The mean over the for-duration of the global chi-square test's normal score exceeds its critical value; see the cause groups in the event log." + caution,
		},
		{
			Name: RuleMemberShifted, Signal: SignalAbsW, Severity: "warning",
			Raise: ShiftRaise, Clear: ShiftClear, For: ShiftWindow, Mean: true, ZRaise: zTwo, ZClear: kRaise, Hold: ShiftWindow,
			SuppressedBy: RuleMemberDiverging, DeferAbove: kRaise,
			Summary:     "Member {{ $labels.member }} of {{ $labels.structure }} shows a small persistent shift",
			Description: "The mean of the member's w statistic over the last hour is shifted beyond what noise explains: a small persistent fault (a stiffness change in a redundant panel, a slowly drifting gauge) that single epochs do not show." + caution,
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
			Description: "The member's total axial force (zero-state force plus the measured change, or the reconciled prediction) exceeds the stated share of its design resistance (EN 1993-1-1 or AISC 360-16, tension or flexural buckling). " + capacity.Caution,
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
		{
			Name: RuleReconcileDrops, Signal: SignalReconcileDropIncrease, Severity: "critical",
			Raise: 0, Clear: 0, Window: CountWindow,
			Summary:     "Live reconciliation of {{ $labels.structure }} leaves readings out",
			Description: "Committed readings that found the reconciliation queue full could not be read back from the store in the counting window: they are stored and acknowledged, but their epochs were not reconciled live and no alarm could be raised from them. The service log names their time range and the store's error; recompute the range with monitor replay once the store reads again.",
		},
	}
	for _, r := range rules {
		if err := r.Validate(); err != nil {
			return nil, err
		}
	}
	return rules, nil
}

// GlobalTestSize returns the size (false-alarm probability) alpha of the
// global test that the FitRejected rule among rules applies to one epoch:
// its p-value threshold, or for the normal score of the chi-square
// statistic (SignalFitZ) the upper tail beyond its threshold,
// 1 - Phi(Raise). Without such a rule it is reconcile.DefaultAlphaGlobal.
func GlobalTestSize(rules []Rule) float64 {
	for _, r := range rules {
		if r.Name != RuleFitRejected {
			continue
		}
		switch r.Signal {
		case SignalPValue:
			return r.Raise
		case SignalFitZ:
			// Rounded to 10 significant digits: the round trip through
			// the normal quantile leaves the last bits of the size the
			// threshold was derived from (0.001 came back 0.0010000000000000009).
			a := distuv.UnitNormal.Survival(r.Raise)
			if v, err := strconv.ParseFloat(strconv.FormatFloat(a, 'g', 10, 64), 64); err == nil {
				a = v
			}
			return a
		}
	}
	return reconcile.DefaultAlphaGlobal
}
