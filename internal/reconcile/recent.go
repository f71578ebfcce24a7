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
// time span). The sums are formed afresh, oldest epoch first, when asked
// for (no running sums), so that a replay of the same epochs gives the same
// numbers to the last bit.
// RecentRanker is not safe for concurrent use.
type RecentRanker struct {
	d     time.Duration
	index map[string]int
	proto []Cause // one per label: kind, label and constants
	queue []recentEpoch
}

type recentEpoch struct {
	t     time.Time
	terms []recentTerm
}

// recentTerm is one candidate's statistics in one epoch (k indexes proto).
type recentTerm struct {
	k              int
	num, den, sig2 float64
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
	e := recentEpoch{t: t, terms: make([]recentTerm, len(causes))}
	for i, c := range causes {
		k, ok := r.index[c.Label]
		if !ok {
			k = len(r.proto)
			r.index[c.Label] = k
			r.proto = append(r.proto, c)
		}
		e.terms[i] = recentTerm{k: k, num: c.Num, den: c.Den, sig2: c.sig2}
	}
	r.queue = append(r.queue, e)
	from := t.Add(-r.d)
	drop := 0
	for drop < len(r.queue) && r.queue[drop].t.Before(from) {
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
	n := len(r.proto)
	num, den, sig2 := make([]float64, n), make([]float64, n), make([]float64, n)
	count := make([]int, n)
	for q := range r.queue {
		for _, x := range r.queue[q].terms {
			num[x.k] += x.num
			den[x.k] += x.den
			sig2[x.k] += x.sig2
			count[x.k]++
		}
	}
	onset := r.onsets(n)
	out := make([]Cause, 0, n)
	for k, p := range r.proto {
		if count[k] == 0 {
			continue
		}
		c := finishCause(p.Kind, p.Label, num[k], den[k], sig2[k], count[k])
		c.info = p.info
		c.finishSizes()
		if sn, sd := onset.num[k], onset.den[k]; onset.at[k] > 0 && c.Separable {
			// The size (and its spread) is estimated over the epochs since
			// the cause's estimated onset; T and the grouping stay those
			// of the whole span.
			sized := c
			sized.Num, sized.Den = sn, sd
			sized.finishSizes()
			c.Size, c.DisplaySize, c.Std, c.Implausible = sized.Size, sized.DisplaySize, sized.Std, sized.Implausible
			c.Strain, c.StrainStd = sized.Strain, sized.StrainStd
		}
		out = append(out, c)
	}
	return out
}

// onsetSet holds, per candidate, the sums of n_k and d_k over the epochs
// since its estimated onset and the queue index of that onset (-1 when the
// candidate never had a positive d_k sum, 0 when the onset is the span's
// first epoch).
type onsetSet struct {
	num, den, best []float64
	at             []int
}

// onsets returns, for each of the n candidates, the sums of n_k and d_k over
// the epochs since its estimated onset (used when that is later than the
// span's first epoch). A cause that began within the span (a step fault seen
// for part of the for-duration) would otherwise have its size diluted by the
// epochs before it. The onset is the maximum-likelihood change point of a
// shift of unknown size in the epochs' numerators: the start j maximising
// (sum_{i>=j} n_i)^2 / (sum_{i>=j} d_i), the generalised likelihood ratio of
// a step at j (Hinkley, "Inference about the change-point from cumulative
// sum tests", Biometrika 58, 1971; from memory). For a cause present over
// the whole span the first epoch wins and nothing changes.
//
// One pass over the held epochs, newest first, serves every candidate: a
// candidate's sums and its ratio change only in the epochs that carry it,
// so the ratio is compared there (after all of that epoch's terms are
// added), in the same order and with the same operations as a separate
// pass per candidate would.
func (r *RecentRanker) onsets(n int) onsetSet {
	o := onsetSet{num: make([]float64, n), den: make([]float64, n), best: make([]float64, n), at: make([]int, n)}
	sn, sd := make([]float64, n), make([]float64, n)
	for k := range o.at {
		o.at[k] = -1
	}
	for q := len(r.queue) - 1; q >= 0; q-- {
		terms := r.queue[q].terms
		for _, x := range terms {
			sn[x.k] += x.num
			sd[x.k] += x.den
		}
		for _, x := range terms {
			if k := x.k; sd[k] > 0 {
				if g := sn[k] * sn[k] / sd[k]; o.at[k] < 0 || g > o.best[k] {
					o.best[k], o.at[k], o.num[k], o.den[k] = g, q, sn[k], sd[k]
				}
			}
		}
	}
	return o
}
