package reconcile

import (
	"math"
	"testing"
	"time"

	"trussmonitor/internal/simulate"
)

// TestMemberStateAgainstTruth runs the project's simulator (which keeps the
// true total force of every member, dead load included) through the
// processor and compares each member's total with the truth: a measured
// total differs by the gauges' noise only (5 sigma of the member's force),
// a predicted one by the noise of the estimated loads (bounded here by 5 %
// of the largest true force of the structure, a figure observed on these
// seeded runs with margin, not a published one).
func TestMemberStateAgainstTruth(t *testing.T) {
	for _, name := range []string{"footbridge", "roof"} {
		t.Run(name, func(t *testing.T) {
			f := loadScnFixture(t, name)
			p := f.processor(t, ProcessorOptions{})
			var worstMeasured, worstPredicted, scale float64
			epochs := 0
			f.run(t, scnOptions(t, 5, 40*time.Minute, time.Minute), func(g *simulate.Generator, s simulate.Step, values map[string]float64) {
				res := p.Process(s.Time, f.sm.Evaluate(values), nil)
				if res.Outcome != OutcomeAccepted && res.Outcome != OutcomeRejected {
					return
				}
				epochs++
				sigma := map[string]float64{}
				for _, m := range res.Members {
					sigma[m.Member] = m.SigmaN
				}
				for _, v := range s.Truth.Forces {
					scale = math.Max(scale, math.Abs(v))
				}
				for k, ms := range res.State {
					truth := s.Truth.Forces[k]
					if ms.Measured {
						worstMeasured = math.Max(worstMeasured, math.Abs(ms.TotalN-truth)/sigma[ms.Member])
					} else {
						worstPredicted = math.Max(worstPredicted, math.Abs(ms.TotalN-truth))
					}
					if math.IsNaN(ms.Utilisation) || math.IsNaN(ms.StressPa) {
						t.Fatalf("%s: member %s: utilisation %v stress %v", s.Time, ms.Member, ms.Utilisation, ms.StressPa)
					}
				}
			})
			t.Logf("%d epochs: measured totals within %.2f sigma of the truth, predicted totals within %.2f kN (largest true force %.1f kN)",
				epochs, worstMeasured, worstPredicted/1e3, scale/1e3)
			if epochs < 30 {
				t.Fatalf("only %d fitted epochs", epochs)
			}
			if worstMeasured > 5 {
				t.Errorf("a measured total is %.2f sigma from the true force", worstMeasured)
			}
			if worstPredicted > 0.05*scale {
				t.Errorf("a predicted total is %.2f kN from the true force (5 %% of %.1f kN allowed)", worstPredicted/1e3, scale/1e3)
			}
		})
	}
}

// TestMemberStateMissingLoad: with a load channel missing and estimated
// (EstimateMissingLoads), a gauged member's reconciled total is still its
// zero-state force plus its fitted change (the estimated pattern and the
// input errors enter both the same way), and the ungauged totals stay
// close to the truth.
func TestMemberStateMissingLoad(t *testing.T) {
	f := loadScnFixture(t, "footbridge")
	p := f.processor(t, ProcessorOptions{EstimateMissingLoads: true})
	epochs := 0
	f.run(t, scnOptions(t, 9, 20*time.Minute, time.Minute), func(g *simulate.Generator, s simulate.Step, values map[string]float64) {
		delete(values, "pad_3")
		res := p.Process(s.Time, f.sm.Evaluate(values), nil)
		if res.Outcome != OutcomeAccepted && res.Outcome != OutcomeRejected {
			t.Fatalf("%s: %s: %s", s.Time, res.Outcome, res.Reason)
		}
		epochs++
		estimated := false
		for _, l := range res.Loads {
			estimated = estimated || l.Pattern == "panel_3"
		}
		if !estimated {
			t.Fatalf("%s: panel_3 not estimated (loads %+v)", s.Time, res.Loads)
		}
		byMember := map[string]MemberResult{}
		for _, m := range res.Members {
			byMember[m.Member] = m
		}
		for k, ms := range res.State {
			mr, gauged := byMember[ms.Member]
			if gauged && mr.Available {
				if d := math.Abs(ms.PredictedTotalN - (ms.ZeroStateN + mr.FittedN)); d > 1e-9*math.Max(1e3, math.Abs(ms.PredictedTotalN)) {
					t.Fatalf("%s %s: predicted total %v, zero state + fitted change %v", s.Time, ms.Member, ms.PredictedTotalN, ms.ZeroStateN+mr.FittedN)
				}
			}
			if d := math.Abs(ms.PredictedTotalN - s.Truth.Forces[k]); d > 5e3 {
				t.Errorf("%s %s: predicted total %.1f kN, true %.1f kN", s.Time, ms.Member, ms.PredictedTotalN/1e3, s.Truth.Forces[k]/1e3)
			}
		}
	})
	if epochs < 15 {
		t.Fatalf("only %d epochs", epochs)
	}
}
