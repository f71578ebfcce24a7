package alerts

import (
	"math"
	"sort"
	"time"
)

// meanSeries is one subject's per-epoch statistic of the mean rules (a
// member's w, or the fit score) in time order, with a running sum per
// window duration.
//
// A mean rule compares the mean of the statistic over its window with a
// threshold at every epoch; summing the window afresh each time costs one
// addition per epoch in the window (3,600 per member and epoch for an hour
// of 1 s epochs). The running sums decide the comparison instead whenever
// the mean is farther from the threshold than the rounding error can
// reach; the mean itself, when it is needed (a close call, or an event's
// evidence), is still summed afresh, newest sample first, exactly as
// before, so every decision and every reported value is the same to the
// last bit.
//
// The bound: the running sum is formed by additions and subtractions of
// the window's samples since it was last set to zero, each rounding by at
// most u times the magnitude of its result (u = 2^-53, the unit roundoff),
// which never exceeds the largest sum of |v| held since (peak); the
// newest-first sum of n terms differs from the exact sum by at most
// (n - 1) u times the sum of |v| (Higham, "Accuracy and Stability of
// Numerical Algorithms", 2nd ed., 2002, eq. 4.4; from memory). Their
// difference is thus at most (ops + n) u peak, widened by a quarter, and
// the running sum is set to zero and formed again once the operations
// exceed four times the window's samples, so that the bound stays tight
// and the work per epoch constant.
type meanSeries struct {
	t    []time.Time
	v    []float64
	wins []runningWindow
}

// runningWindow is the running sum of one window duration.
type runningWindow struct {
	d      time.Duration
	lo, hi int     // the samples [lo, hi) are in the sums
	sum    float64 // running sum of the finite values
	abs    float64 // running sum of their magnitudes
	peak   float64 // the largest abs since the sums were set to zero
	bad    int     // values that are not finite (not in the sums)
	ops    int     // terms added or removed since the sums were set to zero
}

// add appends a sample (at a time not before the previous one) and drops
// the samples before oldest once they are more than half of those held
// (as appendSample, dropCount).
func (ms *meanSeries) add(t time.Time, v float64, oldest time.Time) {
	ms.t = append(ms.t, t)
	ms.v = append(ms.v, v)
	if drop := dropCount(ms.t, oldest); drop > 0 {
		ms.t = append(ms.t[:0], ms.t[drop:]...)
		ms.v = append(ms.v[:0], ms.v[drop:]...)
		for i := range ms.wins {
			w := &ms.wins[i]
			if w.lo < drop {
				// Its samples are partly gone: formed again when next used.
				*w = runningWindow{d: w.d}
				continue
			}
			w.lo -= drop
			w.hi -= drop
		}
	}
}

// window returns the running window of duration d brought to [t - d, t]:
// the samples at or after t - d and not after t.
func (ms *meanSeries) window(t time.Time, d time.Duration) *runningWindow {
	var w *runningWindow
	for i := range ms.wins {
		if ms.wins[i].d == d {
			w = &ms.wins[i]
			break
		}
	}
	if w == nil {
		ms.wins = append(ms.wins, runningWindow{d: d})
		w = &ms.wins[len(ms.wins)-1]
	}
	hi := len(ms.t)
	for hi > 0 && ms.t[hi-1].After(t) {
		hi--
	}
	from := t.Add(-d)
	if hi < w.hi || w.lo > 0 && !ms.t[w.lo-1].Before(from) || w.ops > 4*(w.hi-w.lo)+64 {
		// The window moved back (not in time order), or the sums went
		// through many operations: set them to zero and start at the
		// window's first sample.
		lo := sort.Search(hi, func(i int) bool { return !ms.t[i].Before(from) })
		*w = runningWindow{d: d, lo: lo, hi: lo}
	}
	for ; w.hi < hi; w.hi++ {
		w.put(ms.v[w.hi], 1)
	}
	for w.lo < w.hi && ms.t[w.lo].Before(from) {
		w.put(ms.v[w.lo], -1)
		w.lo++
	}
	return w
}

// put adds (sign 1) or removes (sign -1) one value.
func (w *runningWindow) put(v float64, sign int) {
	w.ops++
	if math.IsInf(v, 0) || math.IsNaN(v) {
		w.bad += sign
		return
	}
	if sign > 0 {
		w.sum += v
		w.abs += math.Abs(v)
		w.peak = max(w.peak, w.abs)
		return
	}
	w.sum -= v
	w.abs -= math.Abs(v)
}

// n returns the number of samples in the window.
func (w *runningWindow) n() int { return w.hi - w.lo }

// above reports whether the window's mean as windowMean computes it (its
// magnitude when abs) exceeds thr, and sure whether the running sums
// decide that beyond the rounding error; when not sure, above is false
// and the mean must be summed afresh.
func (w *runningWindow) above(thr float64, abs bool) (above, sure bool) {
	n := w.n()
	if n == 0 || w.bad > 0 || math.IsNaN(thr) || math.IsInf(w.sum, 0) || math.IsNaN(w.sum) {
		return false, false
	}
	const u = 0x1p-53
	const tiny = 0x1p-1000 // covers underflow in the bounds
	e := 1.25*float64(w.ops+n+2)*u*w.peak + tiny
	lo, hi := (w.sum-e)/float64(n), (w.sum+e)/float64(n)
	// The rounding of the mean's division and of these bounds.
	lo -= 4*u*math.Abs(lo) + tiny
	hi += 4*u*math.Abs(hi) + tiny
	if abs {
		switch {
		case lo > 0:
		case hi < 0:
			lo, hi = -hi, -lo
		default:
			lo, hi = 0, max(-lo, hi)
		}
	}
	switch {
	case lo > thr:
		return true, true
	case hi < thr:
		return false, true
	}
	return false, false
}

// mean returns the mean and count of the samples in [t - d, t], summed
// newest first (windowMean's order).
func (ms *meanSeries) mean(t time.Time, d time.Duration) (float64, int) {
	if ms == nil {
		return 0, 0
	}
	from := t.Add(-d)
	sum, n := 0.0, 0
	for i := len(ms.t) - 1; i >= 0 && !ms.t[i].Before(from); i-- {
		if ms.t[i].After(t) {
			continue
		}
		sum += ms.v[i]
		n++
	}
	if n == 0 {
		return 0, 0
	}
	return sum / float64(n), n
}

// meanAbove reports whether the mean over [t - d, t] (its magnitude when
// abs) exceeds MeanThreshold(floor, z, n), and the number n of samples: the
// running sums decide when they can, the mean summed afresh otherwise.
func (ms *meanSeries) meanAbove(t time.Time, d time.Duration, floor, z float64, abs bool) (bool, int) {
	if ms == nil {
		return false, 0
	}
	w := ms.window(t, d)
	n := w.n()
	if n == 0 {
		return false, 0
	}
	thr := MeanThreshold(floor, z, n)
	if above, sure := w.above(thr, abs); sure {
		return above, n
	}
	m, n := ms.mean(t, d)
	if abs {
		m = math.Abs(m)
	}
	return n > 0 && m > MeanThreshold(floor, z, n), n
}
