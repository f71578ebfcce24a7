package livestate

import (
	"testing"
	"time"

	"trussmonitor/internal/alerts"
)

// TestEventWordingLikeReplay: the dashboard words an alarm with the one
// renderer the replay report uses (alerts.Message), for members and for the
// global test.
func TestEventWordingLikeReplay(t *testing.T) {
	for _, ev := range []alerts.Event{
		{Rule: alerts.RuleMemberDiverging, Subject: "D2", Kind: alerts.Raised, Time: time.Unix(100, 0),
			Evidence: alerts.Evidence{Signal: "abs_w", Value: 5.2, Threshold: 3.29, W: 5.2, Bias: 3050, ActiveSince: time.Unix(40, 0)}},
		{Rule: alerts.RuleFitRejected, Subject: "alder-creek", Kind: alerts.Cleared, Time: time.Unix(200, 0),
			Evidence: alerts.Evidence{Signal: "fit_p_value", Value: 0.2, Threshold: 0.01}},
	} {
		if got, want := (&entry{}).dashboardEvent(ev).Message, alerts.Message(ev); got != want {
			t.Errorf("dashboard message %q, want the report's %q", got, want)
		}
	}
}
