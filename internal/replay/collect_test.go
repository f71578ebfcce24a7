package replay

import (
	"testing"

	"trussmonitor/internal/alerts"
)

// TestEventWordingLikeLive: the report words an alarm with the one renderer
// the dashboard uses (alerts.Message).
func TestEventWordingLikeLive(t *testing.T) {
	ev := alerts.Event{Rule: alerts.RuleMemberDiverging, Subject: "D2", Kind: alerts.Raised,
		Evidence: alerts.Evidence{Signal: "abs_w", Value: 5.2, Threshold: 3.29, W: 5.2, Bias: 3050}}
	c := &collector{}
	if got, want := c.event(ev).Message, alerts.Message(ev); got != want {
		t.Errorf("report message %q, want %q", got, want)
	}
}
