package report

import (
	"math"
	"math/bits"
	"sort"
	"time"
)

// epochSummary is everything the HTML page shows of the epochs, kept in
// a size that does not depend on the number of epochs: counts, each
// member's test figures, one min/max envelope per plotted line (a bucket
// per pixel column of the period [From, To)), the first and last rejected
// epoch per pixel column for the timeline, and a count of the intervals
// between epochs for the median epoch step. It is filled one epoch at a
// time (add), so a month costs the same memory as an hour.
type epochSummary struct {
	tr timeRange
	// k is the critical value of the w-test (the acceptance band and the
	// count of |w| above it).
	k float64
	// n is the number of epochs, rejected those the global test rejected.
	n, rejected int
	members     []memberFigures
	// fit is the envelope of log10 of the p-value (floored at pFloor).
	fit envelope
	// loads holds per pattern the envelopes of the estimate and of the
	// estimate -/+ one standard deviation.
	loads []loadEnvelopes
	// force holds per member the envelopes of the plotted lines.
	force []memberEnvelopes
	// rej holds per pixel column the first and last rejected epoch (n 0:
	// none); rejBefore and rejAfter the rejected epochs outside the period.
	rej                 []bucket
	rejBefore, rejAfter bucket
	steps               stepCounter
	prev                int64
}

// memberFigures are one member's figures of the summary table.
type memberFigures struct {
	present, checkable, over int
	maxW                     float64 // largest |w| (NaN: none)
}

type loadEnvelopes struct{ val, low, high envelope }

type memberEnvelopes struct{ meas, pred, bandLo, bandHi, w envelope }

// newEpochSummary prepares a summary for the given columns over the time
// range tr (whose step is set by finish).
func newEpochSummary(tr timeRange, k float64, members, patterns int) *epochSummary {
	s := &epochSummary{tr: tr, k: k, fit: make(envelope, plotCs), rej: make([]bucket, plotCs)}
	s.members = make([]memberFigures, members)
	s.force = make([]memberEnvelopes, members)
	for i := range s.members {
		s.members[i].maxW = math.NaN()
		s.force[i] = memberEnvelopes{make(envelope, plotCs), make(envelope, plotCs), make(envelope, plotCs), make(envelope, plotCs), make(envelope, plotCs)}
	}
	s.loads = make([]loadEnvelopes, patterns)
	for j := range s.loads {
		s.loads[j] = loadEnvelopes{make(envelope, plotCs), make(envelope, plotCs), make(envelope, plotCs)}
	}
	return s
}

// add takes one epoch (oldest first, rows aligned with the columns).
func (s *epochSummary) add(e Epoch) {
	t := e.Time.UnixNano()
	if s.n > 0 {
		s.steps.add(t - s.prev)
	}
	s.prev = t
	s.n++
	if e.Fit.Rejected {
		s.rejected++
		b := &s.rejAfter
		switch {
		case t < s.tr.t0:
			b = &s.rejBefore
		case t <= s.tr.t1:
			b = &s.rej[s.tr.column(t)]
		}
		if b.n == 0 {
			b.first = t
		}
		b.last = t
		b.n++
	}
	if !math.IsNaN(e.Fit.PValue) {
		s.put(s.fit, t, math.Log10(math.Max(e.Fit.PValue, pFloor)))
	}
	for j, l := range e.Loads {
		if !l.Present {
			continue
		}
		le := s.loads[j]
		s.put(le.val, t, l.Value)
		s.put(le.low, t, l.Value-l.StdDev)
		s.put(le.high, t, l.Value+l.StdDev)
	}
	for i, mr := range e.Members {
		if !mr.Present {
			continue
		}
		mf := &s.members[i]
		mf.present++
		me := s.force[i]
		s.put(me.meas, t, mr.Measured)
		s.put(me.pred, t, mr.Predicted)
		s.put(me.bandLo, t, mr.Predicted-s.k*mr.SigmaResidual)
		s.put(me.bandHi, t, mr.Predicted+s.k*mr.SigmaResidual)
		if !mr.Checkable {
			continue
		}
		s.put(me.w, t, mr.W)
		if math.IsNaN(mr.W) {
			continue
		}
		mf.checkable++
		if a := math.Abs(mr.W); math.IsNaN(mf.maxW) || a > mf.maxW {
			mf.maxW = a
		}
		if math.Abs(mr.W) > s.k {
			mf.over++
		}
	}
}

// put adds value v at time t to the envelope (min/max decimation per pixel
// column); non-finite values and times outside the period are left out.
func (s *epochSummary) put(env envelope, t int64, v float64) {
	if math.IsNaN(v) || math.IsInf(v, 0) || t < s.tr.t0 || t > s.tr.t1 {
		return
	}
	b := &env[s.tr.column(t)]
	if b.n == 0 {
		*b = bucket{lo: v, hi: v, first: t, last: t, n: 1}
		return
	}
	b.lo, b.hi = math.Min(b.lo, v), math.Max(b.hi, v)
	b.last = t
	b.n++
}

// finish sets the time range's median step and gap threshold from the
// epochs seen (newTimeRange's rule) and keeps the load envelopes of the
// patterns kept (nil: all).
func (s *epochSummary) finish(keep []bool) {
	s.tr.setStep(s.steps.median())
	if keep == nil {
		return
	}
	var loads []loadEnvelopes
	for j, k := range keep {
		if k {
			loads = append(loads, s.loads[j])
		}
	}
	s.loads = loads
}

// rejectedIntervals are the timeline's rejected stretches: each rejected
// epoch covers one epoch step, and stretches closer than a pixel are
// merged. Within one pixel column every rejected epoch merges with the
// one before, so the first and last rejected epoch per column give the
// same stretches as the epochs themselves.
func (s *epochSummary) rejectedIntervals(f frame) []interval {
	step := s.tr.step
	if step <= 0 {
		step = int64(time.Second)
	}
	var rej []interval
	take := func(t int64) {
		if n := len(rej); n > 0 && f.x(t)-f.x(rej[n-1].to) < 1 {
			rej[n-1].to = t + step
			return
		}
		rej = append(rej, interval{t, t + step})
	}
	cols := make([]bucket, 0, len(s.rej)+2)
	cols = append(append(append(cols, s.rejBefore), s.rej...), s.rejAfter)
	for _, b := range cols {
		if b.n == 0 {
			continue
		}
		take(b.first)
		if b.n > 1 {
			take(b.last)
		}
	}
	return rej
}

// stepCounter counts the intervals between consecutive epochs for their
// median. It is exact while at most maxDistinctSteps different intervals
// occur (epochs close on window boundaries, so a replay has a handful);
// beyond that it rounds every interval to 6 significant bits (within
// 1/32 of its value), which bounds the number of keys to about 64 per
// power of two.
type stepCounter struct {
	counts map[int64]int64
	n      int64
	coarse bool
}

const maxDistinctSteps = 4096

func (c *stepCounter) add(d int64) {
	if c.counts == nil {
		c.counts = map[int64]int64{}
	}
	if c.coarse {
		d = roundBits(d)
	}
	c.counts[d]++
	c.n++
	if !c.coarse && len(c.counts) > maxDistinctSteps {
		c.coarse = true
		old := c.counts
		c.counts = make(map[int64]int64, len(old))
		for k, v := range old {
			c.counts[roundBits(k)] += v
		}
	}
}

// roundBits rounds d to its 6 most significant bits.
func roundBits(d int64) int64 {
	neg := d < 0
	u := uint64(d)
	if neg {
		u = uint64(-d)
	}
	if l := bits.Len64(u); l > 6 {
		sh := uint(l - 6)
		u = (u + 1<<(sh-1)) >> sh << sh
	}
	if neg {
		return -int64(u)
	}
	return int64(u)
}

// median returns the element at index n/2 of the sorted intervals (0 when
// there are none), as newTimeRange took it from the sorted list.
func (c *stepCounter) median() int64 {
	if c.n == 0 {
		return 0
	}
	keys := make([]int64, 0, len(c.counts))
	for k := range c.counts {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool { return keys[i] < keys[j] })
	idx := c.n / 2
	for _, k := range keys {
		if idx < c.counts[k] {
			return k
		}
		idx -= c.counts[k]
	}
	return keys[len(keys)-1]
}
