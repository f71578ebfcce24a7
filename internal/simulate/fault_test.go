package simulate

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"
)

func fmtSscan(id string, k *int) (int, error) {
	return fmt.Sscanf(strings.TrimPrefix(id, "pad_"), "%d", k)
}

func TestParseFault(t *testing.T) {
	at := time.Date(2026, 6, 1, 14, 0, 0, 0, time.UTC)
	for _, tc := range []struct {
		spec   string
		kind   FaultKind
		target string
		offset time.Duration
		at     time.Time
		size   float64
	}{
		{"stiffness:D2:10m:0.3", FaultStiffness, "D2", 10 * time.Minute, time.Time{}, 0.3},
		{"stiffness:D2:14h", FaultStiffness, "D2", 14 * time.Hour, time.Time{}, DefaultStiffnessLoss},
		{"stiffness:D2:2026-06-01T14:00:00Z:0.3", FaultStiffness, "D2", 0, at, 0.3},
		{"stiffness:D2:2026-06-01T16:00:00+02:00", FaultStiffness, "D2", 0, at, DefaultStiffnessLoss},
		{"drift:B4_a:2h:50e-6/h", FaultDrift, "B4_a", 2 * time.Hour, time.Time{}, 50e-6 / 3600},
		{"drift:B4_a:2h:1e-6/s", FaultDrift, "B4_a", 2 * time.Hour, time.Time{}, 1e-6},
		{"drift:B4_a:2h:-86.4e-6/d", FaultDrift, "B4_a", 2 * time.Hour, time.Time{}, -1e-9},
		{"drift:temp_top:1h:0.5", FaultDrift, "temp_top", time.Hour, time.Time{}, 0.5 / 3600},
		{"drift:B2:3h:5kN/d", FaultDrift, "B2", 3 * time.Hour, time.Time{}, 5000.0 / 86400}, // a member's gauge force, N per second
		{"stuck:T4_a:1h", FaultStuck, "T4_a", time.Hour, time.Time{}, 0},
		{"settlement:L8:3h:0.005", FaultSettlement, "L8", 3 * time.Hour, time.Time{}, 0.005},
		{"settlement:L8:3h:5 mm", FaultSettlement, "L8", 3 * time.Hour, time.Time{}, 0.005},
		{"settlement:L8:3h:0.25in", FaultSettlement, "L8", 3 * time.Hour, time.Time{}, 0.00635}, // 1 in = 25.4 mm exactly (NIST SP 811)
		{"spring:L8:3h:-0.5", FaultSpring, "L8", 3 * time.Hour, time.Time{}, -0.5},
		{"spring:L8:3h:2", FaultSpring, "L8", 3 * time.Hour, time.Time{}, 2},
	} {
		f, err := ParseFault(tc.spec)
		if err != nil {
			t.Errorf("%s: %v", tc.spec, err)
			continue
		}
		if f.Kind != tc.kind || f.Target != tc.target || f.Offset != tc.offset || !f.At.Equal(tc.at) || !near(f.Size, tc.size) {
			t.Errorf("%s: got %+v", tc.spec, f)
		}
		start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
		if tc.at.IsZero() && !f.Time(start).Equal(start.Add(tc.offset)) {
			t.Errorf("%s: time %s", tc.spec, f.Time(start))
		}
	}
}

func near(a, b float64) bool {
	d := a - b
	if d < 0 {
		d = -d
	}
	return d <= 1e-12*(1+b*b)
}

func TestParseFaultErrors(t *testing.T) {
	for _, tc := range []struct{ spec, want string }{
		{"stiffness:D2", "expected at least KIND:TARGET:AT"},
		{"crack:D2:1h", `unknown kind "crack"`},
		{"stiffness::1h", "target"},
		{"stiffness:D2:soon", "neither a duration"},
		{"stiffness:D2:-1h", "before the start"},
		{"stiffness:D2:1h:1.5", "between 0 and 1"},
		{"stiffness:D2:1h:abc", "between 0 and 1"},
		{"drift:B4_a:1h", "needs a rate"},
		{"drift:B4_a:1h:5/week", "unknown time unit"},
		{"drift:B4_a:1h:x/h", "not a number"},
		{"drift:B4_a:1h:0", "zero"},
		{"stuck:T4_a:1h:3", "takes no size"},
		{"settlement:L8:1h", "needs a size"},
		{"settlement:L8:1h:5 kN", "settlement size"},
		{"settlement:L8:1h:0.1:2", "too many fields"},
		{"spring:L8:1h", "relative change of the spring stiffness"},
		{"spring:L8:1h:-1", "above -1"},
		{"spring:L8:1h:0", "not 0"},
	} {
		_, err := ParseFault(tc.spec)
		if err == nil {
			t.Errorf("%s: accepted", tc.spec)
			continue
		}
		if !errors.Is(err, ErrFaultSpec) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %q, want it to mention %q", tc.spec, err, tc.want)
		}
	}
}

func FuzzParseFault(f *testing.F) {
	for _, s := range []string{"stiffness:D2:10m:0.3", "drift:B4_a:2h:50e-6/h", "stuck:T4_a:1h", "settlement:L8:3h:0.005", "stiffness:D2:2026-06-01T14:00:00Z:0.3", "::::", ""} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ft, err := ParseFault(s)
		if err != nil {
			return
		}
		if ft.Target == "" || ft.Kind == "" {
			t.Fatalf("%q parsed to %+v", s, ft)
		}
		if ft.Kind == FaultStiffness && !(ft.Size > 0 && ft.Size < 1) {
			t.Fatalf("%q: stiffness loss %g", s, ft.Size)
		}
	})
}

// TestMemberDriftForce: drift:B2:1h:120kN/d spreads over the gauges of B2
// so that the member's gauge force (E A times its gauges' mean strain,
// through the sensor map) drifts at 120 kN a day from 1 h on and not
// before: the difference from a run without the fault (same seed) is 0
// before the fault and grows as 120 kN/d (5 kN/h) after it, to 1 N.
func TestMemberDriftForce(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 3 * time.Hour
	opt.Rate = time.Minute
	opt.BadRate = 0
	_, sm := load(t, footStruct, footSensors)
	force := func(g *Generator) []float64 {
		var out []float64
		for s, err := range g.All() {
			if err != nil {
				t.Fatal(err)
			}
			values := map[string]float64{}
			for _, r := range s.Readings {
				v, err := sm.Convert(r.Channel, r.Value)
				if err != nil {
					t.Fatal(err)
				}
				values[r.Channel] = v
			}
			for _, m := range sm.Evaluate(values).Members {
				if m.Member == "B2" {
					out = append(out, m.ForceN)
				}
			}
		}
		return out
	}
	clean := force(newGen(t, opt))
	drift := force(newGen(t, opt, "drift:B2:1h:120kN/d"))
	if len(clean) != 180 || len(drift) != 180 {
		t.Fatalf("%d and %d epochs of B2, want 180", len(clean), len(drift))
	}
	worst := 0.0
	for i := range clean {
		want := 0.0
		if el := time.Duration(i) * time.Minute; el > time.Hour {
			want = 120e3 * (el - time.Hour).Hours() / 24
		}
		worst = max(worst, math.Abs(drift[i]-clean[i]-want))
	}
	// 10 kN at the end; measured 0.00 N off (the drift is added to the
	// engineering value before the noise, the same in both runs).
	if worst > 1 {
		t.Errorf("B2's force differs from the 120 kN/d ramp by up to %.1f N", worst)
	}
	t.Logf("B2: largest deviation from the ramp %.2f N (the ramp reaches %.0f N)", worst, drift[179]-clean[179])
}
