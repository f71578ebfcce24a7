package main

import (
	"bytes"
	"context"
	"strings"
	"testing"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/replay"
)

// TestReplaySummaryCountsAddUp: the alarm line's numbers add up (events =
// raised + cleared), and one event is singular.
func TestReplaySummaryCountsAddUp(t *testing.T) {
	for _, c := range []struct {
		events int
		raised map[alerts.RuleName]int
		want   string
	}{
		{8, map[alerts.RuleName]int{alerts.RuleFitRejected: 1, alerts.RuleMemberDiverging: 4}, "alarms:     5 raised (FitRejected 1, MemberDiverging 4), 3 cleared: 8 events\n"},
		{1, map[alerts.RuleName]int{alerts.RuleFitRejected: 1}, "alarms:     1 raised (FitRejected 1), 0 cleared: 1 event\n"},
		{0, map[alerts.RuleName]int{}, "alarms:     none raised (0 events)\n"},
	} {
		var b bytes.Buffer
		printReplaySummary(&b, &replay.Summary{Events: c.events, Raised: c.raised, ByOutcome: map[string]int64{}})
		if !strings.Contains(b.String(), c.want) {
			t.Errorf("summary lacks %q:\n%s", c.want, b.String())
		}
	}
}

// TestPlural: "1 structure", "2 structures".
func TestPlural(t *testing.T) {
	if got := plural(1, "structure", "structures"); got != "1 structure" {
		t.Errorf("plural(1) = %q", got)
	}
	if got := plural(2, "structure", "structures"); got != "2 structures" {
		t.Errorf("plural(2) = %q", got)
	}
}

// TestVersionFlag: --version prints the build (module path, version, Go
// release) and exits 0.
func TestVersionFlag(t *testing.T) {
	var out, errb bytes.Buffer
	if code := dispatch(context.Background(), []string{"--version"}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if s := out.String(); !strings.HasPrefix(s, "monitor ") || !strings.Contains(s, "go1.") {
		t.Errorf("--version printed %q", s)
	}
}
