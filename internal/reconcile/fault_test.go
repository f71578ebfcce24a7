package reconcile

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// TestFaultRankerSinceOnset: a step of size 5 begins half-way through a
// RecentRanker's span of 20 epochs; the alarm rises at the span's end and
// the fault stays for 200 more epochs. The FaultRanker started then sizes
// the fault over every epoch since its onset: its size and standard
// deviation equal the closed-form least-squares estimate of a constant
// size over those epochs, (sum n) / (sum d) and 1 / sqrt(sum d), to
// rounding, and its T is (sum n)^2 / (sum d) over every epoch it holds.
// The RecentRanker, holding only its span, has a standard deviation
// sqrt(20) times larger. Per-epoch numerators n = d x + noise with
// standard deviation sqrt(d), seeded.
func TestFaultRankerSinceOnset(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 1))
	const d, x, span, after = 4.0, 5.0, 20, 200
	t0 := time.Date(2026, 6, 1, 14, 0, 0, 0, time.UTC)
	recent, _ := NewRecentRanker(time.Duration(span-1) * time.Second)
	var f *FaultRanker
	var sumAll, sumOnset, dAll, dOnset float64
	for i := 0; i < span+after; i++ {
		n := math.Sqrt(d) * rng.NormFloat64()
		if i >= span/2 {
			n += d * x
		}
		c := []Cause{finishCause(GaugeFault, "gauge D2", n, d, d, 1)}
		recent.Add(t0.Add(time.Duration(i)*time.Second), c)
		sumAll += n
		dAll += d
		if i >= span/2 {
			sumOnset += n
			dOnset += d
		}
		switch {
		case i == span-1:
			f = recent.Fault()
			if got := f.Causes()[0]; math.Abs(got.Size-x) > 3/math.Sqrt(span/2*d) {
				t.Errorf("at the raise: size %.3f, want %.1f within 3 standard deviations", got.Size, x)
			}
		case i >= span:
			f.Add(t0.Add(time.Duration(i)*time.Second), c)
		}
	}
	got := f.Causes()[0]
	if want := sumOnset / dOnset; math.Abs(got.Size-want) > 1e-12*math.Abs(want) {
		t.Errorf("size %.15g, want the estimate over the epochs since the onset %.15g", got.Size, want)
	}
	if want := 1 / math.Sqrt(dOnset); math.Abs(got.Std-want) > 1e-12*want {
		t.Errorf("std %.15g, want 1/sqrt(sum d since the onset) = %.15g", got.Std, want)
	}
	if want := sumAll * sumAll / dAll; math.Abs(got.T-want) > 1e-9*want {
		t.Errorf("T %.10g, want (sum n)^2 / (sum d) over every epoch = %.10g", got.T, want)
	}
	if got.Epochs != span+after {
		t.Errorf("epochs %d, want %d", got.Epochs, span+after)
	}
	if r := recent.Causes()[0]; r.Std < 3*got.Std {
		t.Errorf("the recent span's std %.4f is not well above the fault's %.4f: the fault's epochs did not accumulate", r.Std, got.Std)
	}
}

// TestFaultRankerNewCandidate: a candidate first seen after the raise (a
// stiffness signature that appears with a new load state) is summed from
// then on.
func TestFaultRankerNewCandidate(t *testing.T) {
	recent, _ := NewRecentRanker(time.Minute)
	t0 := time.Date(2026, 6, 1, 14, 0, 0, 0, time.UTC)
	recent.Add(t0, []Cause{finishCause(GaugeFault, "gauge D2", 8, 4, 4, 1)})
	f := recent.Fault()
	f.Add(t0.Add(time.Second), []Cause{finishCause(GaugeFault, "gauge D2", 8, 4, 4, 1), finishCause(GaugeFault, "gauge D3", 3, 1, 1, 1)})
	cs := f.Causes()
	if len(cs) != 2 || cs[0].Label != "gauge D2" || cs[1].Label != "gauge D3" {
		t.Fatalf("causes %+v, want gauge D2 then gauge D3", cs)
	}
	if cs[0].Size != 2 || cs[0].Epochs != 2 || cs[1].Size != 3 || cs[1].Epochs != 1 {
		t.Errorf("D2 size %g over %d epochs (want 2 over 2), D3 size %g over %d (want 3 over 1)", cs[0].Size, cs[0].Epochs, cs[1].Size, cs[1].Epochs)
	}
}
