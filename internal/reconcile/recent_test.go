package reconcile

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// TestRecentRankerOnset: a step of size 5 (in the signature's units) that
// begins half-way through the span is sized 5, not 2.5 as the least-squares
// estimate of a constant size over the whole span would give; its T is that
// of the whole span. A cause present over the whole span keeps the
// whole-span estimate. The per-epoch numerator is n = d x + noise with
// standard deviation sqrt(d) (the w-test's normalisation), seeded.
func TestRecentRankerOnset(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 2))
	const d, x, epochs = 4.0, 5.0, 40
	t0 := time.Date(2026, 6, 1, 14, 0, 0, 0, time.UTC)
	step, _ := NewRecentRanker(time.Hour)
	whole, _ := NewRecentRanker(time.Hour)
	var sumStep, sumWhole float64
	for i := 0; i < epochs; i++ {
		noise := math.Sqrt(d) * rng.NormFloat64()
		nStep := noise
		if i >= epochs/2 {
			nStep += d * x
		}
		sumStep += nStep
		nWhole := d*x + noise
		sumWhole += nWhole
		tm := t0.Add(time.Duration(i) * time.Minute)
		step.Add(tm, []Cause{finishCause(GaugeFault, "gauge D2", nStep, d, d, 1)})
		whole.Add(tm, []Cause{finishCause(GaugeFault, "gauge D2", nWhole, d, d, 1)})
	}
	got := step.Causes()[0]
	// The size over the last half: 5 within 3 standard deviations of the
	// half-span estimate (1/sqrt(20 d) = 0.11).
	if math.Abs(got.Size-x) > 3/math.Sqrt(epochs/2*d) {
		t.Errorf("step half-way: size %.3f, want %.1f (the whole-span estimate would be %.3f)", got.Size, x, sumStep/(epochs*d))
	}
	if wantT := sumStep * sumStep / (epochs * d); math.Abs(got.T-wantT) > 1e-9*wantT {
		t.Errorf("step half-way: T %.6g, want the whole span's %.6g", got.T, wantT)
	}
	if got.Std > 1.01/math.Sqrt(epochs/2*d) || got.Std < 0.99/math.Sqrt(epochs*d) {
		t.Errorf("step half-way: std %.4f, want about 1/sqrt(sum d since the onset) = %.4f", got.Std, 1/math.Sqrt(epochs/2*d))
	}
	w := whole.Causes()[0]
	if math.Abs(w.Size-sumWhole/(epochs*d)) > 0.05 {
		t.Errorf("present throughout: size %.4f, want about the whole-span estimate %.4f", w.Size, sumWhole/(epochs*d))
	}
}
