package alerts

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/reconcile"
)

// Message is the one-line wording of an event, the same on the dashboard,
// in the API and in the replay report: what the signal was against its
// threshold, and since when the condition held for a raised alarm.
func Message(e Event) string {
	ev := e.Evidence
	since := ""
	if !ev.ActiveSince.IsZero() {
		since = " since " + ev.ActiveSince.UTC().Format(time.RFC3339)
	}
	raised := e.Kind == Raised
	switch ev.Signal {
	case "abs_w":
		if raised {
			return fmt.Sprintf("|w| = %.3g above %.3g%s; estimated gauge bias %s", ev.Value, ev.Threshold, since, causeSize(ev.Bias, "N"))
		}
		return fmt.Sprintf("|w| = %.3g, at or below %.3g", ev.Value, ev.Threshold)
	case "fit_p_value":
		if raised {
			return fmt.Sprintf("global test p-value %.3g below %.3g%s (chi-square %.4g with %d degrees of freedom)", ev.Value, ev.Threshold, since, ev.ChiSquare, ev.DOF)
		}
		return fmt.Sprintf("global test p-value %.3g, at or above %.3g", ev.Value, ev.Threshold)
	case SignalUtilisation.String():
		if raised {
			return fmt.Sprintf("utilisation %.3g above %.3g%s (%s)", ev.Value, ev.Threshold, since, capacity.Caution)
		}
		return fmt.Sprintf("utilisation %.3g, at or below %.3g (%s)", ev.Value, ev.Threshold, capacity.Caution)
	case "seconds_since_last_reading":
		if raised {
			return fmt.Sprintf("no reading for %.0f s (limit %.0f s)", ev.Value, ev.Threshold)
		}
		return "reporting again"
	}
	return fmt.Sprintf("%s = %.4g (threshold %.4g)%s", ev.Signal, ev.Value, ev.Threshold, since)
}

// MemberFigures returns the w and the estimated gauge bias (newtons) an
// event of a member's |w| (signal abs_w) carries; ok is false for the
// events of the other signals, which carry neither. The dashboard, the API
// and the replay report show an event's w and size from it.
func (e Event) MemberFigures() (w, bias float64, ok bool) {
	if e.Evidence.Signal != SignalAbsW.String() {
		return 0, 0, false
	}
	return e.Evidence.W, e.Evidence.Bias, true
}

// CauseText is the one-line wording of a ranked cause of an event, the
// same on the dashboard, in the API and in the replay report: its
// separability group, kind, subject, test statistic and size with its
// standard deviation, e.g. "[group 1] gauge fault D2: T = 27.9, size
// 3.16 kN ± 0.05 kN".
func CauseText(c reconcile.RankedCause) string {
	grp := ""
	if c.Group > 0 {
		grp = fmt.Sprintf("[group %d] ", c.Group)
	}
	size := causeSize(c.Size, c.Unit)
	if c.Std > 0 && !math.IsInf(c.Std, 0) {
		size += " ± " + causeSize(c.Std, c.Unit)
	}
	if c.Implausible {
		size += " (implausible size)"
	}
	// A carried hypothesis of the adapted fit is a parameter, not a test:
	// its T is 0 and not shown.
	t := "T = –, "
	switch {
	case c.T == 0:
		t = ""
	case !math.IsNaN(c.T):
		t = "T = " + strconv.FormatFloat(c.T, 'f', 1, 64) + ", "
	}
	return fmt.Sprintf("%s%s %s: %ssize %s", grp, strings.ReplaceAll(c.Kind.String(), "_", " "), c.Subject, t, size)
}

// causeSize formats a size in its unit: newtons as kilonewtons with two
// decimals, others with three significant digits.
func causeSize(v float64, unit string) string {
	switch {
	case math.IsNaN(v):
		return "–"
	case unit == "N":
		return strconv.FormatFloat(v/1000, 'f', 2, 64) + " kN"
	case unit == "" || unit == "1":
		return strconv.FormatFloat(v, 'g', 3, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64) + " " + unit
}

// ShownCauses is the part of a ranked list of causes an event carries and
// shows: the top three, and the whole first group when it is larger (its
// causes cannot be told apart, so none of them may be cut).
func ShownCauses(causes []reconcile.RankedCause) []reconcile.RankedCause {
	n := min(len(causes), 3)
	for n < len(causes) && causes[n].Group == 1 {
		n++
	}
	return causes[:n]
}
