package alerts

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// windowMeanRef is the mean rules' window mean summed afresh over a plain
// sample list, newest first: the reference meanSeries must match.
func windowMeanRef(h []sample, t time.Time, d time.Duration) (float64, int) {
	from := t.Add(-d)
	sum, n := 0.0, 0
	for i := len(h) - 1; i >= 0 && !h[i].t.Before(from); i-- {
		if h[i].t.After(t) {
			continue
		}
		sum += h[i].v
		n++
	}
	if n == 0 {
		return 0, 0
	}
	return sum / float64(n), n
}

// TestMeanSeriesDecisions: the running-sum decisions of meanAbove equal
// those of the mean summed afresh for every epoch of a long seeded series
// (gaps, repeated times, a step, outliers of 1e6, one NaN), for thresholds
// far from the mean and within a few ulps of it, over windows of 2, 10
// and 60 minutes with the old samples dropped as the evaluator drops them.
func TestMeanSeriesDecisions(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	windows := []time.Duration{2 * time.Minute, 10 * time.Minute, time.Hour}
	keep := time.Hour
	var ms meanSeries
	var ref []sample
	tm := t0
	decided, close := 0, 0
	for i := 0; i < 8000; i++ {
		switch rng.IntN(50) {
		case 0:
			tm = tm.Add(time.Duration(rng.IntN(600)) * time.Second) // a gap
		case 1: // the same time again
		default:
			tm = tm.Add(time.Second)
		}
		v := rng.NormFloat64()
		if i > 4000 {
			v += 3 // a step
		}
		if rng.IntN(2000) == 0 {
			v = 1e6
		}
		if i == 2000 {
			v = math.NaN()
		}
		ms.add(tm, v, tm.Add(-keep))
		ref = appendSample(ref, sample{tm, v}, tm.Add(-keep))
		for _, d := range windows {
			m, n := windowMeanRef(ref, tm, d)
			for _, abs := range []bool{false, true} {
				mv := m
				if abs {
					mv = math.Abs(m)
				}
				floors := []float64{mv + 0.5, mv - 0.5, mv, math.Nextafter(mv, math.Inf(1)), math.Nextafter(mv, math.Inf(-1)), 0}
				for f, floor := range floors {
					want := n > 0 && mv > MeanThreshold(floor, 0, n)
					got, gn := ms.meanAbove(tm, d, floor, 0, abs)
					if got != want || gn != n {
						t.Fatalf("sample %d, window %v, abs %v, floor %v: above %v with %d samples, want %v with %d (mean %v)", i, d, abs, floor, got, gn, want, n, mv)
					}
					if w := ms.window(tm, d); w.n() > 0 && f < 2 {
						if _, sure := w.above(MeanThreshold(floor, 0, n), abs); sure {
							decided++
						} else {
							close++
						}
					}
				}
				if gm, gn := ms.mean(tm, d); math.Float64bits(gm) != math.Float64bits(m) && !(math.IsNaN(gm) && math.IsNaN(m)) || gn != n {
					t.Fatalf("sample %d, window %v: mean %v of %d, want %v of %d", i, d, gm, gn, m, n)
				}
			}
		}
	}
	// The running sums decide the comparisons half a unit from the mean,
	// except in the windows holding the NaN.
	if decided < 10*close {
		t.Errorf("running sums decided %d comparisons, %d were summed afresh; want most decided", decided, close)
	}
}
