package alerts

import (
	"bytes"
	"fmt"
	"strconv"
	"time"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/metrics"
)

// PrometheusRulesFor writes the given rules for the given structures.
// Each rule carries the label structure (equal to its series' label) so
// that the groups of different structures are not duplicates to promtool.
//
// A mean rule becomes a recording rule of its per-epoch statistic and an
// alert on its mean over the for-duration (see meanExpr). Translation of
// any other rule (signal S, thresholds Raise and Clear, for F):
//
//	expr: (S) > Raise
//	      or ((S) > Clear and on(<labels>) ALERTS{alertname="<rule>", alertstate="firing", structure="<s>"})
//	for:  F
//
// The second branch is the hysteresis: it only matches while the alert is
// already firing (ALERTS of the previous evaluation), so a firing alert is
// held while the signal stays beyond Clear and resolves at the first
// evaluation where it does not, while a pending alert still needs the
// raise condition at every evaluation. This is the in-process evaluator's
// state machine. Prometheus 2.42 (Debian's) accepts keep_firing_for, but
// that holds an alert for a time, not down to a threshold, so it is not
// used. Counter increases are written as `x - (x offset W or x * 0)`: the
// value W ago with the default 5 m lookback, 0 when the series is younger,
// which the evaluator reproduces exactly (no rate extrapolation).
func PrometheusRulesFor(rules []Rule, structures []string) ([]byte, error) {
	if len(structures) == 0 {
		return nil, fmt.Errorf("alerts: no structure names given; the rules file needs at least one")
	}
	type rule struct {
		Record      string            `yaml:"record,omitempty"`
		Alert       string            `yaml:"alert,omitempty"`
		Expr        string            `yaml:"expr"`
		For         string            `yaml:"for,omitempty"`
		Labels      map[string]string `yaml:"labels,omitempty"`
		Annotations map[string]string `yaml:"annotations,omitempty"`
	}
	type group struct {
		Name  string `yaml:"name"`
		Rules []rule `yaml:"rules"`
	}
	var file struct {
		Groups []group `yaml:"groups"`
	}
	seen := map[string]bool{}
	for _, s := range structures {
		if s == "" || seen[s] {
			return nil, fmt.Errorf("alerts: structure name %q is empty or given twice", s)
		}
		seen[s] = true
		g := group{Name: "trussmonitor-" + s}
		recorded := map[Signal]bool{}
		for _, r := range rules {
			if r.Mean && !recorded[r.Signal] {
				recorded[r.Signal] = true
				name, expr := recording(r.Signal, s)
				g.Rules = append(g.Rules, rule{Record: name, Expr: expr})
			}
		}
		for _, r := range rules {
			if err := r.Validate(); err != nil {
				return nil, err
			}
			pr := rule{Alert: string(r.Name), Expr: Expr(r, s), Labels: map[string]string{"severity": r.Severity, "structure": s},
				Annotations: map[string]string{"summary": r.Summary, "description": r.Description}}
			if r.For > 0 && !r.Mean {
				pr.For = promDuration(r.For)
			}
			g.Rules = append(g.Rules, pr)
		}
		file.Groups = append(file.Groups, g)
	}
	var buf bytes.Buffer
	buf.WriteString("# Alerting rules of the truss reconciliation monitor, written by `monitor rules`.\n")
	buf.WriteString("# Same rules, thresholds and for-durations as the in-process evaluator\n")
	buf.WriteString("# (internal/alerts); do not edit by hand, regenerate instead.\n")
	buf.WriteString("# This is a monitoring aid, not a safety verdict; decisions rest with a\n")
	buf.WriteString("# licensed engineer under local codes.\n")
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(file); err != nil {
		return nil, fmt.Errorf("alerts: writing rules YAML: %w", err)
	}
	if err := enc.Close(); err != nil {
		return nil, fmt.Errorf("alerts: writing rules YAML: %w", err)
	}
	return buf.Bytes(), nil
}

// Recorded series of the mean rules: the per-epoch statistic that the
// rules average over their windows.
const (
	// RecordedMemberW is w of each member while it is checkable.
	RecordedMemberW = "shm:member_w:checkable"
	// RecordedFitZ is the Wilson-Hilferty score of the global test
	// (SignalFitZ).
	RecordedFitZ = "shm:fit_z:wilson_hilferty"
)

// recording returns the recording rule of a mean rule's signal.
func recording(sig Signal, s string) (name, expr string) {
	sel := "{structure=" + strconv.Quote(s) + "}"
	if sig == SignalFitZ {
		chi, dof := metrics.FitChiSquare+sel, metrics.FitDOF+sel
		return RecordedFitZ, fmt.Sprintf("((%s / %s) ^ (1 / 3) - (1 - 2 / (9 * %s))) / sqrt(2 / (9 * %s)) and %s > 0", chi, dof, dof, dof, dof)
	}
	return RecordedMemberW, fmt.Sprintf("%s%s and on(structure, member) %s%s == 1", metrics.MemberW, sel, metrics.MemberCheckable, sel)
}

// meanExpr is the PromQL of a mean rule: the mean of the recorded
// statistic over the for-duration against MeanThreshold with n the number
// of samples (count_over_time), and the hold branch over the hold-off.
//
// The one difference from the evaluator: Prometheus averages the samples
// it scraped (the last epoch's value at each scrape), the evaluator every
// epoch; they agree when the scrape interval equals the epoch interval, and
// a scrape interval shorter than the epochs makes Prometheus count an
// epoch more than once (a smaller threshold). Prometheus also clears a
// member that stopped being checkable for the whole hold-off, where the
// evaluator holds an alarm whose member was not measured at all (the
// metrics keep an unmeasured member's last values, so Prometheus holds it
// too). And the evaluator restarts a member's window when its w begins to
// come from another fit (Member.Restart: adaptation began, changed or
// ended), where Prometheus averages the w series across the change.
func meanExpr(r Rule, s string) string {
	sel := "{structure=" + strconv.Quote(s) + "}"
	rec := RecordedMemberW + sel
	on := "structure, member"
	abs := func(x string) string { return "abs(" + x + ")" }
	if r.Signal == SignalFitZ {
		rec = RecordedFitZ + sel
		on = "structure"
		abs = func(x string) string { return x }
	}
	cond := func(d time.Duration, floor, z float64) string {
		rng := rec + "[" + promDuration(d) + "]"
		return fmt.Sprintf("%s > clamp_min(%s / sqrt(count_over_time(%s)), %s)", abs("avg_over_time("+rng+")"), num(z), rng, num(floor))
	}
	firing := fmt.Sprintf("ALERTS{alertname=%s, alertstate=\"firing\", structure=%s}", strconv.Quote(string(r.Name)), strconv.Quote(s))
	raise := cond(r.For, r.Raise, r.ZRaise)
	if r.SuppressedBy != "" {
		// Same scope: the same subject; otherwise any alarm of the structure.
		son := on
		if by, ok := ruleNamed(r.SuppressedBy); !ok || by.Signal.Scope() != r.Signal.Scope() {
			son = "structure"
		}
		raise = fmt.Sprintf("(%s unless on(%s) ALERTS{alertname=%s, alertstate=\"firing\", structure=%s})", raise, son, strconv.Quote(string(r.SuppressedBy)), strconv.Quote(s))
	}
	if r.DeferAbove > 0 && r.Signal == SignalAbsW {
		raise = fmt.Sprintf("(%s unless on(%s) %s > %s)", raise, on, abs(rec), num(r.DeferAbove))
	}
	return fmt.Sprintf("%s\nor\n(%s and on(%s) %s)", raise, cond(r.Hold, r.Clear, r.ZClear), on, firing)
}

// ruleNamed returns the default rule of that name.
func ruleNamed(name RuleName) (Rule, bool) {
	rules, err := DefaultRules()
	if err != nil {
		return Rule{}, false
	}
	for _, r := range rules {
		if r.Name == name {
			return r, true
		}
	}
	return Rule{}, false
}

// Expr returns the PromQL expression of rule r for structure s.
func Expr(r Rule, s string) string {
	if r.Mean {
		return meanExpr(r, s)
	}
	sel := "{structure=" + strconv.Quote(s) + "}"
	var sig, on string
	switch r.Signal {
	case SignalAbsW:
		sig = fmt.Sprintf("abs(%s%s) and on(structure, member) %s%s == 1", metrics.MemberW, sel, metrics.MemberCheckable, sel)
		on = "structure, member"
	case SignalUtilisation:
		sig = metrics.MemberUtilisation + sel
		on = "structure, member"
	case SignalPValue:
		sig = metrics.FitPValue + sel
		on = "structure"
	case SignalSilence:
		sig = "time() - (" + metrics.ChannelLastReading + sel + " or " + metrics.ChannelWatchedSince + sel + ")"
		on = "structure, channel"
	case SignalSkewIncrease:
		sig = increaseExpr(metrics.ClockSkewReadings+sel, r.Window)
		on = "structure"
	case SignalRejectIncrease:
		sig = increaseExpr(metrics.IngestRejections+sel, r.Window)
		on = "structure"
	case SignalCommitFailIncrease:
		sig = increaseExpr(metrics.CommitFailures+sel, r.Window)
		on = "structure"
	case SignalBrokerConnected:
		sig = metrics.BrokerConnected + sel
		on = "structure"
	case SignalReconcileDropIncrease:
		sig = increaseExpr(metrics.ReconcileQueueDropped+sel, r.Window)
		on = "structure"
	}
	op := ">"
	if r.Below {
		op = "<"
	}
	raise := fmt.Sprintf("(%s) %s %s", sig, op, num(r.Raise))
	if r.Clear == r.Raise {
		return raise
	}
	firing := fmt.Sprintf("ALERTS{alertname=%s, alertstate=\"firing\", structure=%s}", strconv.Quote(string(r.Name)), strconv.Quote(s))
	return fmt.Sprintf("%s\nor\n((%s) %s %s and on(%s) %s)", raise, sig, op, num(r.Clear), on, firing)
}

// increaseExpr is the counter's increase over w, summed over its other
// labels, with a missing old value taken as 0.
func increaseExpr(sel string, w time.Duration) string {
	cur := "sum by (structure) (" + sel + ")"
	old := "sum by (structure) (" + sel + " offset " + promDuration(w) + ")"
	return fmt.Sprintf("%s - (%s or %s * 0)", cur, old, cur)
}

func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// promDuration writes d in Prometheus duration syntax (whole seconds).
func promDuration(d time.Duration) string {
	s := int64(d / time.Second)
	switch {
	case s%3600 == 0:
		return strconv.FormatInt(s/3600, 10) + "h"
	case s%60 == 0:
		return strconv.FormatInt(s/60, 10) + "m"
	}
	return strconv.FormatInt(s, 10) + "s"
}
