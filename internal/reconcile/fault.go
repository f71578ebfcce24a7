package reconcile

import "time"

// FaultRanker sums the cause statistics of every epoch since a fault
// began, for as long as its alarm is active, so that the sizes an alarm
// carries are estimated over all the fault's epochs and improve while it
// stays (DESIGN.md, Identification and adaptation: "the event carries the
// size estimated over the epochs since the fault began and updates it
// while the alarm is active").
//
// It starts from a RecentRanker (RecentRanker.Fault) when the alarm rises:
// per candidate, the test statistic's sums are those of the whole span
// and the size's sums those since the candidate's estimated onset (as
// RecentRanker.Causes). Every later epoch adds its n_k = c_k^T W e_k and
// d_k = c_k^T W Q_e,k W c_k to both, so that
//
//	T = (sum n_k)^2 / (sum d_k),   size = (sum' n_k) / (sum' d_k)
//
// (sum' over the epochs since the onset) are again the chi-square(1)
// statistic and the least-squares estimate of a constant size, whose
// standard deviation 1/sqrt(sum' d_k) shrinks as the fault's epochs
// accumulate. The sums are running sums: memory does not grow with the
// alarm's length, and the same epochs in the same order give the same
// numbers to the last bit. FaultRanker is not safe for concurrent use.
type FaultRanker struct {
	index          map[string]int
	proto          []Cause
	num, den, sig2 []float64 // whole-span sums (the test statistic)
	sNum, sDen     []float64 // sums since the onset (the size)
	count          []int
	drift          []driftSums // gauge-bias candidates' time sums (drift.go)
	ref            time.Time   // the first epoch's time (drift times count from it)
}

// Fault returns a FaultRanker seeded with the epochs held now: call it at
// the epoch an alarm rises, then Add every later epoch's causes.
func (r *RecentRanker) Fault() *FaultRanker {
	n := len(r.proto)
	f := &FaultRanker{index: make(map[string]int, n), proto: append([]Cause(nil), r.proto...),
		num: make([]float64, n), den: make([]float64, n), sig2: make([]float64, n),
		sNum: make([]float64, n), sDen: make([]float64, n), count: make([]int, n), drift: make([]driftSums, n)}
	for k, p := range r.proto {
		f.index[p.Label] = k
	}
	for _, e := range r.queue {
		if f.ref.IsZero() {
			f.ref = e.t
		}
		tk := days(e.t, f.ref)
		for _, x := range e.terms {
			f.num[x.k] += x.num
			f.den[x.k] += x.den
			f.sig2[x.k] += x.sig2
			f.count[x.k]++
			f.addDrift(x.k, tk, x.num, x.den)
		}
	}
	onset := r.onsets(n)
	for k := range f.proto {
		if onset.at[k] > 0 {
			f.sNum[k], f.sDen[k] = onset.num[k], onset.den[k]
		} else {
			f.sNum[k], f.sDen[k] = f.num[k], f.den[k]
		}
	}
	return f
}

// Add folds the causes of the epoch at t (as Identification.Causes) into
// the sums. Epochs must come in time order.
func (f *FaultRanker) Add(t time.Time, causes []Cause) {
	if f.ref.IsZero() {
		f.ref = t
	}
	tk := days(t, f.ref)
	for _, c := range causes {
		k, ok := f.index[c.Label]
		if !ok {
			k = len(f.proto)
			f.index[c.Label] = k
			f.proto = append(f.proto, c)
			f.num, f.den, f.sig2 = append(f.num, 0), append(f.den, 0), append(f.sig2, 0)
			f.sNum, f.sDen, f.count = append(f.sNum, 0), append(f.sDen, 0), append(f.count, 0)
			f.drift = append(f.drift, driftSums{})
		}
		f.num[k] += c.Num
		f.den[k] += c.Den
		f.sig2[k] += c.sig2
		f.sNum[k] += c.Num
		f.sDen[k] += c.Den
		f.count[k]++
		f.addDrift(k, tk, c.Num, c.Den)
	}
}

// addDrift adds an epoch at tk days to the time sums of candidate k when it
// is a gauge bias.
func (f *FaultRanker) addDrift(k int, tk, num, den float64) {
	if f.proto[k].Kind != GaugeFault {
		return
	}
	d := &f.drift[k]
	d.tn += tk * num
	d.td += tk * den
	d.t2d += tk * tk * den
}

// Causes returns every candidate's statistics over the fault's epochs, in
// first-seen order (group them with Identification.Groups): T from the
// whole sums, the size and its standard deviation from the sums since the
// candidate's onset.
func (f *FaultRanker) Causes() []Cause {
	out := make([]Cause, 0, len(f.proto))
	for k, p := range f.proto {
		if f.count[k] == 0 {
			continue
		}
		c := finishCause(p.Kind, p.Label, f.num[k], f.den[k], f.sig2[k], f.count[k])
		c.info = p.info
		c.finishSizes()
		if c.Separable && f.sDen[k] > 0 && (f.sNum[k] != f.num[k] || f.sDen[k] != f.den[k]) {
			sized := c
			sized.Num, sized.Den = f.sNum[k], f.sDen[k]
			sized.finishSizes()
			c.Size, c.DisplaySize, c.Std, c.Implausible = sized.Size, sized.DisplaySize, sized.Std, sized.Implausible
			c.Strain, c.StrainStd = sized.Strain, sized.StrainStd
		}
		out = append(out, c)
	}
	// The drifts of the gauges, over the whole sums (drift.go), offered
	// only when the ramp explains the gauge's epochs better than a step of
	// its bias at the step's estimated onset (both fit an onset and a
	// size): a step that began within the epochs otherwise looks more like
	// a ramp than like a constant over them.
	for k, p := range f.proto {
		if p.Kind != GaugeFault {
			continue
		}
		d, ok := driftCause(p, f.num[k], f.den[k], f.drift[k], f.count[k])
		if !ok || !(f.sDen[k] > 0) || d.T <= f.sNum[k]*f.sNum[k]/f.sDen[k] {
			continue
		}
		out = append(out, d)
	}
	return out
}
