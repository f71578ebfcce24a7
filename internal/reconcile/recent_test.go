package reconcile

import (
	"math"
	"math/rand/v2"
	"strconv"
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

// onsetSumsOne is the onset search of one candidate k on its own (a pass
// over the held epochs per candidate), the reference onsets must match
// bit for bit.
func (r *RecentRanker) onsetSumsOne(k int) (num, den float64, ok bool) {
	var sn, sd, best float64
	bestAt := -1
	var bn, bd float64
	for q := len(r.queue) - 1; q >= 0; q-- {
		for _, x := range r.queue[q].terms {
			if x.k == k {
				sn += x.num
				sd += x.den
			}
		}
		if sd > 0 {
			if g := sn * sn / sd; bestAt < 0 || g > best {
				best, bestAt, bn, bd = g, q, sn, sd
			}
		}
	}
	if bestAt <= 0 {
		return 0, 0, false
	}
	return bn, bd, true
}

// TestRecentRankerOnsetsOnePass: the one-pass onset search over all
// candidates gives bit for bit the sums of a separate search per candidate,
// with candidates that come and go, a label twice in one epoch, steps
// within the span, zero and negative d_k terms (seeded).
func TestRecentRankerOnsetsOnePass(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	labels := []string{"a", "b", "c", "d", "e", "f"}
	r, _ := NewRecentRanker(30 * time.Second)
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	checked := 0
	for i := 0; i < 400; i++ {
		var cs []Cause
		for j, l := range labels {
			if rng.Float64() < 0.2 {
				continue // absent from this epoch
			}
			d := rng.Float64() * 3
			switch rng.IntN(20) {
			case 0:
				d = 0
			case 1:
				d = -rng.Float64()
			}
			n := rng.NormFloat64() * math.Sqrt(math.Abs(d))
			if i%100 > 50 && j < 3 {
				n += 4 * d // a step for some candidates
			}
			cs = append(cs, finishCause(GaugeFault, l, n, d, d, 1))
			if rng.IntN(30) == 0 {
				cs = append(cs, finishCause(GaugeFault, l, n/2, d/2, d/2, 1)) // the label twice
			}
		}
		r.Add(t0.Add(time.Duration(i)*time.Second), cs)
		o := r.onsets(len(r.proto))
		for k := range r.proto {
			num, den, ok := r.onsetSumsOne(k)
			got := o.at[k] > 0
			if got != ok || ok && (math.Float64bits(num) != math.Float64bits(o.num[k]) || math.Float64bits(den) != math.Float64bits(o.den[k])) {
				t.Fatalf("epoch %d candidate %s: one pass (%v, %v, %v), per candidate (%v, %v, %v)", i, r.proto[k].Label, o.num[k], o.den[k], got, num, den, ok)
			}
			if ok {
				checked++
			}
		}
	}
	if checked < 100 {
		t.Fatalf("only %d onsets within the span compared; the test data has too few steps", checked)
	}
}

// BenchmarkRecentRankerCauses: the summed causes of a 2-minute span of 1 s
// epochs with 150 candidates each (the 100-channel footbridge's size).
func BenchmarkRecentRankerCauses(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	r, _ := NewRecentRanker(2 * time.Minute)
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	const cands = 150
	for i := 0; i < 121; i++ {
		cs := make([]Cause, cands)
		for j := range cs {
			d := 1 + rng.Float64()
			cs[j] = finishCause(GaugeFault, "gauge "+strconv.Itoa(j), rng.NormFloat64(), d, d, 1)
		}
		r.Add(t0.Add(time.Duration(i)*time.Second), cs)
	}
	b.ReportAllocs()
	for b.Loop() {
		r.Causes()
	}
}
