package reconcile

import (
	"fmt"
	"time"
)

// RecentRanker sums the cause statistics of the epochs of the last
// duration D (for example the for-duration of the alarms), so that the
// causes reported when an alarm rises are estimated over the epochs the
// alarm's decision rests on: with n_k = c_k^T W e_k and d_k = c_k^T W Q_e,k
// W c_k summed over those epochs, T = (sum n_k)^2 / (sum d_k) is
// chi-square(1) without the cause and size = (sum n_k) / (sum d_k) is the
// least-squares estimate of a constant size (as WindowRanker, but over a
// time span and updated incrementally, O(candidates) per epoch).
// RecentRanker is not safe for concurrent use.
type RecentRanker struct {
	d     time.Duration
	index map[string]int
	proto []Cause // one per label: kind, label and constants
	num   []float64
	den   []float64
	sig2  []float64
	count []int
	queue []recentEpoch
}

type recentEpoch struct {
	t              time.Time
	idx            []int
	num, den, sig2 []float64
}

// NewRecentRanker returns a ranker over the epochs of the last d.
func NewRecentRanker(d time.Duration) (*RecentRanker, error) {
	if d <= 0 {
		return nil, fmt.Errorf("reconcile: cause span %v; want positive", d)
	}
	return &RecentRanker{d: d, index: map[string]int{}}, nil
}

// Add records the causes of the epoch at t (as Identification.Causes) and
// forgets the epochs before t - D. Epochs must come in time order.
func (r *RecentRanker) Add(t time.Time, causes []Cause) {
	e := recentEpoch{t: t, idx: make([]int, len(causes)), num: make([]float64, len(causes)),
		den: make([]float64, len(causes)), sig2: make([]float64, len(causes))}
	for i, c := range causes {
		k, ok := r.index[c.Label]
		if !ok {
			k = len(r.proto)
			r.index[c.Label] = k
			p := c
			r.proto = append(r.proto, p)
			r.num = append(r.num, 0)
			r.den = append(r.den, 0)
			r.sig2 = append(r.sig2, 0)
			r.count = append(r.count, 0)
		}
		e.idx[i], e.num[i], e.den[i], e.sig2[i] = k, c.Num, c.Den, c.sig2
		r.num[k] += c.Num
		r.den[k] += c.Den
		r.sig2[k] += c.sig2
		r.count[k]++
	}
	r.queue = append(r.queue, e)
	from := t.Add(-r.d)
	drop := 0
	for drop < len(r.queue) && r.queue[drop].t.Before(from) {
		old := r.queue[drop]
		for i, k := range old.idx {
			r.num[k] -= old.num[i]
			r.den[k] -= old.den[i]
			r.sig2[k] -= old.sig2[i]
			r.count[k]--
		}
		drop++
	}
	if drop > 0 {
		r.queue = append(r.queue[:0], r.queue[drop:]...)
	}
}

// Reset forgets every epoch.
func (r *RecentRanker) Reset() {
	*r = RecentRanker{d: r.d, index: map[string]int{}}
}

// Epochs returns the number of epochs held.
func (r *RecentRanker) Epochs() int { return len(r.queue) }

// Causes returns the summed statistics of every candidate seen in the
// held epochs, in first-seen order (group them with
// Identification.Groups).
func (r *RecentRanker) Causes() []Cause {
	out := make([]Cause, 0, len(r.proto))
	for k, p := range r.proto {
		if r.count[k] == 0 {
			continue
		}
		c := finishCause(p.Kind, p.Label, r.num[k], r.den[k], r.sig2[k], r.count[k])
		c.info = p.info
		c.finishSizes()
		out = append(out, c)
	}
	return out
}
