package pipeline

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/simtest"
	"trussmonitor/internal/store"
)

// eventLog keeps every result's events.
type eventLog struct {
	events []alerts.Event
	last   *Result
}

func (l *eventLog) Epoch(r *Result) {
	l.events = append(l.events, r.Events...)
	l.last = r
}

// feedScenario simulates opt and feeds its readings through p.
func feedScenario(t *testing.T, f *scnFixture, p *Pipeline, opt simulate.Options) time.Time {
	t.Helper()
	g, err := simulate.New(f.st, f.sm, opt)
	if err != nil {
		t.Fatal(err)
	}
	var start time.Time
	ctx := context.Background()
	if err := simtest.Run(g, func(s simulate.Step) error {
		if start.IsZero() {
			start = s.Time
		}
		rs := make([]store.Reading, 0, len(s.Readings))
		for _, r := range s.Readings {
			rs = append(rs, store.Reading{Channel: r.Channel, Time: s.Time, Value: r.Value})
		}
		p.Feed(ctx, rs)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	p.Flush(ctx)
	return start
}

// TestWindowAlarmUngaugedBrace: a 30 % stiffness loss of D4, the ungauged
// diagonal of the footbridge's doubly braced panel 4 (X-braced with the
// gauged C4), moves the gauges by less than their noise in any one epoch:
// it is visible only over the window (issue 8: such a loss "never raises
// an alarm"). MemberShifted, the window alarm (the mean of w over an
// hour), raises on it, once, and the stiffness of D4 is in the first group
// of the alarm's causes, which are sized over the fault's epochs.
//
// With the window alarm's former floor of one standard deviation the mean
// w of C4 (0.55 to 0.6 over the faulted hours) never reached it; measured
// with the floor of half a standard deviation at 10 s sampling, seeds 5001
// to 5003: raised on C4 56 to 58 minutes after the fault, first group
// {E A of D4, E A of V3}, D4 sized -32.2 ± 1.2, -32.3 ± 1.3 and -30.2 ±
// 1.2 % after three faulted hours; at 1 s (100 minutes faulted) 2 of 3 seeds within 59 minutes; at
// 60 s, with 60 epochs in the hour, the threshold 5.33/sqrt(60) = 0.69
// governs and the alarm rose 1 h 43 min to 2 h 25 min after the fault.
func TestWindowAlarmUngaugedBrace(t *testing.T) {
	f := loadScnFixture(t, "footbridge")
	const rate = 10 * time.Second
	lead, after := time.Hour, 4*time.Hour
	if raceDetector {
		after = 2 * time.Hour
	}
	log := &eventLog{}
	p, err := New(f.m, f.sm, Config{Window: rate, MaxLateness: rate}, log)
	if err != nil {
		t.Fatal(err)
	}
	start := feedScenario(t, f, p, scnOptions(t, 5002, lead+after, rate, fmt.Sprintf("stiffness:D4:%s:0.3", lead)))
	var raised []alerts.Event
	for _, e := range log.events {
		t.Logf("+%s %s %s %s value %.3g (%d epochs)", e.Time.Sub(start)-lead, e.Kind, e.Rule, e.Subject, e.Evidence.Value, e.Evidence.Epochs)
		if e.Kind == alerts.Raised && statisticalRules[e.Rule] {
			if e.Time.Sub(start) < lead {
				t.Errorf("%s %s raised at +%s before the fault", e.Rule, e.Subject, e.Time.Sub(start))
				continue
			}
			raised = append(raised, e)
		}
	}
	if len(raised) == 0 {
		t.Fatal("the 30 % loss of D4 raised no statistical alarm in 4 hours")
	}
	if len(raised) > 2 {
		t.Errorf("%d statistical alarms raised for one fault, want at most 2", len(raised))
	}
	var active *alerts.Alarm
	for _, a := range log.last.Active {
		if a.Rule == raised[0].Rule && a.Subject == raised[0].Subject {
			active = &a
		}
	}
	if active == nil {
		t.Fatalf("the alarm %s %s cleared while the fault persists", raised[0].Rule, raised[0].Subject)
	}
	found := false
	for _, c := range active.Causes {
		t.Logf("cause [%d] %s T=%.1f size %.3g ± %.2g %s", c.Group, c.Label, c.T, c.Size, c.Std, c.Unit)
		if c.Group == 1 && c.Label == "E A of D4" {
			found = true
			// Sized over the fault's epochs: -30 % within three of its
			// standard deviations.
			if math.Abs(c.Size-(-30)) > 3*c.Std {
				t.Errorf("E A of D4 sized %.2f ± %.2f %%, want -30 within 3 standard deviations", c.Size, c.Std)
			}
		}
	}
	if !found {
		t.Errorf("E A of D4 not in the first group of the alarm's causes")
	}
}

// TestSpringChangeIdentified: the footbridge's bearing spring at L8 (20
// MN/m in x) loses half its stiffness (a worn elastomeric bearing; the
// simulator re-solves the structure with the spring halved). The spring
// restrains the truss's thermal expansion, so the bottom chord's forces
// shift with the temperature: a statistical alarm rises and "spring L8 x"
// is in the first group of its causes, sized -50 % within three standard
// deviations over the fault's epochs. Measured at 10 s sampling, seed
// 6001: MemberShifted on B2 24.5 minutes after the fault, spring L8 x
// -49.3 ± 0.42 % after four hours, in one group with the axial stiffness
// of the bottom chord members, a horizontal settlement of L0 and
// horizontal loads at L1, L7 and L8 (all move the bottom chord alike).
// One alarm for the fault: before the window alarm adapted the fit and
// restarted the other members' windows on the adapted model, MemberShifted
// also rose on B7, B5 and B4 within three minutes (four alarms).
func TestSpringChangeIdentified(t *testing.T) {
	f := loadScnFixture(t, "footbridge")
	const rate = 10 * time.Second
	lead, after := time.Hour, 4*time.Hour
	if raceDetector {
		after = 2 * time.Hour
	}
	log := &eventLog{}
	p, err := New(f.m, f.sm, Config{Window: rate, MaxLateness: rate}, log)
	if err != nil {
		t.Fatal(err)
	}
	start := feedScenario(t, f, p, scnOptions(t, 6001, lead+after, rate, fmt.Sprintf("spring:L8:%s:-0.5", lead)))
	raises := 0
	for _, e := range log.events {
		if e.Kind == alerts.Raised && statisticalRules[e.Rule] {
			if e.Time.Sub(start) < lead {
				t.Errorf("%s %s raised at +%s before the fault", e.Rule, e.Subject, e.Time.Sub(start))
			}
			raises++
			t.Logf("+%s raised %s %s", (e.Time.Sub(start) - lead).Round(time.Second), e.Rule, e.Subject)
		}
	}
	if raises == 0 {
		t.Fatal("halving the bearing spring raised no statistical alarm in 4 hours")
	}
	if raises > 2 {
		t.Errorf("%d statistical alarms for one fault, want at most 2", raises)
	}
	found := false
	for _, a := range log.last.Active {
		for _, c := range a.Causes {
			if c.Group == 1 && c.Label == "spring L8 x" {
				found = true
				t.Logf("%s %s: spring L8 x %.2f ± %.2f %%", a.Rule, a.Subject, c.Size, c.Std)
				if math.Abs(c.Size-(-50)) > 3*c.Std {
					t.Errorf("%s %s: spring L8 x sized %.2f ± %.2f %%, want -50 within 3 standard deviations", a.Rule, a.Subject, c.Size, c.Std)
				}
			}
		}
	}
	if !found {
		t.Errorf("spring L8 x is not in the first group of any active alarm's causes: %+v", log.last.Active)
	}
}
