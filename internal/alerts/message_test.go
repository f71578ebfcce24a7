package alerts

import (
	"testing"
	"time"
)

// TestMessage: the one wording of each kind of event.
func TestMessage(t *testing.T) {
	since := time.Date(2026, 6, 14, 9, 0, 0, 0, time.UTC)
	for _, c := range []struct {
		e    Event
		want string
	}{
		{Event{Kind: Raised, Evidence: Evidence{Signal: "abs_w", Value: 5.2, Threshold: 3.29, ActiveSince: since, Bias: 3050}},
			"|w| = 5.2 above 3.29 since 2026-06-14T09:00:00Z; estimated gauge bias 3.05 kN"},
		{Event{Kind: Cleared, Evidence: Evidence{Signal: "abs_w", Value: 1.2, Threshold: 2.5}}, "|w| = 1.2, at or below 2.5"},
		{Event{Kind: Raised, Evidence: Evidence{Signal: "fit_p_value", Value: 1e-5, Threshold: 0.001, ChiSquare: 40, DOF: 7}},
			"global test p-value 1e-05 below 0.001 (chi-square 40 with 7 degrees of freedom)"},
		{Event{Kind: Raised, Evidence: Evidence{Signal: "seconds_since_last_reading", Value: 130, Threshold: 120}}, "no reading for 130 s (limit 120 s)"},
		{Event{Kind: Cleared, Evidence: Evidence{Signal: "seconds_since_last_reading"}}, "reporting again"},
	} {
		if got := Message(c.e); got != c.want {
			t.Errorf("Message = %q, want %q", got, c.want)
		}
	}
}
