package reconcile

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat"
)

// driftEpochs feeds a FaultRanker epochs of a gauge-bias candidate whose
// bias is offset plus rate (t - onset) from onset on (rate in N per day;
// zero before onset),
// with the per-epoch bias estimate's noise of variance 1/d, every step, and
// returns the ranker, the epochs' times in days from the first, their
// per-epoch bias estimates n/d and weights d.
func driftEpochs(t *testing.T, offset, rate float64, onset, step time.Duration, n int, seed uint64) (f *FaultRanker, tk, bias, w []float64) {
	return driftEpochsRaised(t, offset, rate, onset, step, n, 0, seed)
}

// driftEpochsRaised is driftEpochs with the alarm raised at epoch raise:
// the epochs up to it are the cause span the fault tracker starts from.
func driftEpochsRaised(t *testing.T, offset, rate float64, onset, step time.Duration, n, raise int, seed uint64) (f *FaultRanker, tk, bias, w []float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	recent, err := NewRecentRanker(time.Duration(raise+2) * step)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < n; i++ {
		at := t0.Add(time.Duration(i) * step)
		d := 4e-6 * (1 + 0.5*math.Sin(float64(i)/7)) // 1/d: a bias variance of (500 N)^2 and so
		b := 0.0
		if el := at.Sub(t0.Add(onset)); el >= 0 {
			b = offset + rate*el.Seconds()/secondsPerDay
		}
		est := b + rng.NormFloat64()/math.Sqrt(d)
		c := finishCause(GaugeFault, "gauge D2", est*d, d, d, 1)
		c.info = candInfo{lower: -5000e-6 * 1e9, upper: 5000e-6 * 1e9, ea: 1e9, delta0: 4.13}
		switch {
		case i < raise:
			recent.Add(at, []Cause{c})
		case i == raise:
			recent.Add(at, []Cause{c})
			f = recent.Fault()
		default:
			f.Add(at, []Cause{c})
		}
		tk = append(tk, at.Sub(t0).Seconds()/secondsPerDay)
		bias = append(bias, est)
		w = append(w, d)
	}
	return f, tk, bias, w
}

func causeByLabel(cs []Cause, label string) (Cause, bool) {
	for _, c := range cs {
		if c.Label == label {
			return c, true
		}
	}
	return Cause{}, false
}

// TestDriftSlopeMatchesRegression: a gauge drifting at 20 kN/d from before
// the first epoch. The drift's size is the weighted least-squares slope of
// the per-epoch biases on time, checked against gonum's
// stat.LinearRegression (closed-form weighted simple linear regression, a
// general-purpose reference) on the same data to 1e-9 relative, and the
// true rate lies within 3 standard deviations; the standard deviation is
// the regression slope's, sqrt(sum w / (sum w sum w t^2 - (sum w t)^2))
// (Draper and Smith, Applied Regression Analysis, 3rd ed., ch. 1 and 9,
// weighted straight line; from memory).
func TestDriftSlopeMatchesRegression(t *testing.T) {
	const rate = 20e3 // N per day
	// 6 h of 10 s epochs; the drift began 2 h before the first epoch.
	f, tk, bias, w := driftEpochs(t, 0, rate, -2*time.Hour, 10*time.Second, 2160, 7)
	d, ok := causeByLabel(f.Causes(), "drift of gauge D2")
	if !ok {
		t.Fatal("no drift candidate among the fault's causes")
	}
	_, slope := stat.LinearRegression(tk, bias, w, false)
	if math.Abs(d.Size-slope) > 1e-9*math.Abs(slope) {
		t.Errorf("drift size %.12g N/d, weighted least-squares slope (gonum) %.12g", d.Size, slope)
	}
	var sw, swt, swt2 float64
	for i := range tk {
		sw += w[i]
		swt += w[i] * tk[i]
		swt2 += w[i] * tk[i] * tk[i]
	}
	if want := math.Sqrt(sw / (sw*swt2 - swt*swt)); math.Abs(d.Std-want) > 1e-9*want {
		t.Errorf("drift std %.10g, want the slope's %.10g", d.Std, want)
	}
	if math.Abs(d.Size-rate) > 3*d.Std {
		t.Errorf("drift %.0f ± %.0f N/d, want %.0f within 3 standard deviations", d.Size, d.Std, rate)
	}
	if d.DisplayUnit != "kN/d" || math.Abs(d.Strain*1e9-d.Size) > 1e-6*math.Abs(d.Size) {
		t.Errorf("drift shown in %q, strain %g per day; want kN/d and size / E A", d.DisplayUnit, d.Strain)
	}
	t.Logf("drift of gauge D2: %.2f ± %.2f kN/d (%.2f ± %.2f µε/d), T %.1f; the constant bias's T %.1f",
		d.DisplaySize, d.Std*1e-3, d.Strain*1e6, d.StrainStd*1e6, d.T, f.Causes()[0].T)
}

// TestDriftSeparatesFromBias: the grouping by RhoMax, by hand on one
// gauge (its per-epoch correlation with its own bias is 1). A drift that
// began at the first epoch separates from a constant bias of the same
// gauge (ramp against constant: rho_time = sqrt(3)/2 = 0.866 < 0.917) and
// ranks first; a constant bias puts the drift candidate with or after the
// bias, never alone before it.
func TestDriftSeparatesFromBias(t *testing.T) {
	id := &Identification{index: map[string]int{"gauge D2": 0}, proj: [][]float64{{1}}, norm: []float64{1}, rhoMax: 0.917}
	t.Run("drift", func(t *testing.T) {
		f, _, _, _ := driftEpochs(t, 0, 20e3, 0, 10*time.Second, 2160, 8)
		gs := id.Groups(f.Causes())
		if len(gs) != 2 || gs[0].Labels() != "drift of gauge D2" {
			t.Fatalf("groups %v, want the drift alone first, then the bias", groupLabels(gs))
		}
		if d := gs[0].Causes[0].drift; math.Abs(d.rhoTime-math.Sqrt(3)/2) > 0.02 {
			t.Errorf("rho_time %.4f, want about sqrt(3)/2", d.rhoTime)
		}
	})
	t.Run("step", func(t *testing.T) {
		// A step of 5 kN 2 minutes into a cause span of 4 minutes (the
		// alarm's fault tracker starts from the span before the raise),
		// then 6 h: the drift is not offered, a step at its onset
		// explains the epochs better.
		f, _, _, _ := driftEpochsRaised(t, 5e3, 0, 2*time.Minute, 10*time.Second, 2160, 24, 10)
		if d, ok := causeByLabel(f.Causes(), "drift of gauge D2"); ok {
			t.Errorf("a step offered as a drift: %.1f ± %.1f kN/d, T %.1f", d.DisplaySize, d.Std*1e-3, d.T)
		}
	})
	t.Run("constant", func(t *testing.T) {
		// A constant bias of 5 kN, no drift.
		f, _, _, _ := driftEpochs(t, 5e3, 0, 0, 10*time.Second, 2160, 9)
		gs := id.Groups(f.Causes())
		in := false
		for _, c := range gs[0].Causes {
			in = in || c.Label == "gauge D2"
		}
		if !in {
			t.Errorf("groups %v: the drift ranks alone before a constant bias", groupLabels(gs))
		}
	})
}

func groupLabels(gs []Group) []string {
	out := make([]string, len(gs))
	for i, g := range gs {
		out[i] = g.Labels()
	}
	return out
}
