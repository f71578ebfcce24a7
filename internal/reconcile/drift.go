package reconcile

import (
	"math"
	"time"
)

// Gauge drift over the window (DESIGN.md, Identification and adaptation:
// "over the window a drift (trend) of one gauge"). A gauge whose bias grows
// linearly from an onset t0, b(t) = s (t - t0) for t > t0, has in epoch k
// the signature of the gauge's bias times tau_k = t_k - t0. With the
// per-epoch sums of the gauge-bias candidate, n_k = c^T W e_k and d_k =
// c^T W Q_e,k W c, the drift's sums over the epochs are
//
//	N(t0) = sum tau_k n_k,   D(t0) = sum tau_k^2 d_k,
//
// its test statistic T = N^2 / D and its size (the rate s) N / D. Every
// epoch's n_k / d_k is the least-squares bias of the gauge in that epoch,
// with variance 1 / d_k; the onset follows from the weighted least-squares
// straight line through these biases, b_k = alpha + s t_k with weights d_k
// (the closed-form weighted regression: s = (F A - E B) / (F C - E^2),
// alpha = (B - s E) / F, with B = sum n_k, A = sum t_k n_k, F = sum d_k,
// E = sum t_k d_k, C = sum t_k^2 d_k), as t0 = -alpha / s, the time the
// line crosses zero. A drift is tested over the epochs of an active
// alarm's fault (FaultRanker): it began before the alarm rose, so t0 is
// held at or before the first of those epochs; when the line crosses zero
// later (the data do not look like a ramp from before the alarm) the ramp
// starts at the first epoch. Sizes are given in newtons per day (shown in
// kN/d) and, through the member's E A, strain per day (µε/d).
//
// Sizes: with t0 from the regression, the rate is the regression slope s
// and its standard deviation sqrt(F / (F C - E^2)), the slope's from the
// two-parameter fit (the onset is estimated from the same data). T is not
// chi-square(1): the onset is fitted (as the two-parameter line's explained
// sum of squares); it is at least the constant bias's T over the same
// epochs, so the drift always ranks with or before its gauge's constant
// bias, and the separability decides whether they can be told apart.
//
// Separability. Over the epochs, the drift's whitened signature is the
// gauge's projected signature p_k times tau_k; a constant-size candidate
// X has p_X,k. When the projected signatures do not change between epochs
// (fixed candidates at one availability mask) their correlation is
// rho_epoch(gauge, X) times the time correlation of the ramp with a
// constant,
//
//	rho_time = sum tau_k d_k / sqrt(sum tau_k^2 d_k sum d_k),
//
// (weights d_k of the gauge; an approximation for the stiffness and
// spring candidates, whose signatures follow the load state). rho_time is
// sqrt(3)/2 = 0.866 for a ramp from the first of evenly weighted epochs,
// below RhoMax = 0.917: a drift that began within the epochs separates
// from a constant bias of its gauge; one whose onset lies far before them
// (rho_time near 1) does not, and they are grouped. Two drifts correlate
// as their gauges do (rho_epoch; their ramps taken alike). The same
// bound RhoMax groups them (Identification.Groups).

// DriftLabel returns the label of the drift candidate of the gauge-bias
// candidate labelled gauge ("gauge B2" gives "drift of gauge B2").
func DriftLabel(gauge string) string { return "drift of " + gauge }

// secondsPerDay converts the drift's time unit.
const secondsPerDay = 86400.0

// driftSums are the running sums of one gauge-bias candidate that a drift
// needs besides sum n_k and sum d_k: times in days since the ranker's
// first epoch.
type driftSums struct {
	tn, td, t2d float64
}

// driftLink ties a drift cause to its gauge for grouping.
type driftLink struct {
	gauge   string  // the gauge-bias candidate's label
	rhoTime float64 // correlation of the ramp with a constant over the epochs
}

// days returns t - ref in days.
func days(t, ref time.Time) float64 { return t.Sub(ref).Seconds() / secondsPerDay }

// driftCause returns the drift cause of the gauge-bias candidate proto from
// its sums over the epochs: b = sum n, f = sum d, ds the time sums (times in
// days from the first epoch), epochs the count. ok is false when the epochs
// span no time (fewer than 3, or the line is not determined).
func driftCause(proto Cause, b, f float64, ds driftSums, epochs int) (Cause, bool) {
	if epochs < 3 || !(f > 0) {
		return Cause{}, false
	}
	a, e, cc := ds.tn, ds.td, ds.t2d
	det := f*cc - e*e
	if !(det > 1e-12*f*cc) {
		return Cause{}, false
	}
	slope, slopeStd := driftSlope(b, a, f, e, cc)
	alpha := (b - slope*e) / f
	t0 := 0.0
	fromLine := false
	if slope != 0 {
		if on := -alpha / slope; on <= 0 {
			t0, fromLine = on, true
		}
	}
	num := a - t0*b
	den := cc - 2*t0*e + t0*t0*f
	c := finishCause(GaugeDrift, DriftLabel(proto.Label), num, den, den, epochs)
	c.info = proto.info
	c.finishSizes()
	if c.Separable && fromLine {
		c.Size, c.Std = slope, slopeStd
		scale, _ := GaugeDrift.Display()
		c.DisplaySize = c.Size * scale
		c.Implausible = c.info.lower < c.info.upper && (c.Size < c.info.lower || c.Size > c.info.upper)
		if c.info.ea > 0 {
			c.Strain, c.StrainStd = c.Size/c.info.ea, c.Std/c.info.ea
		}
		if c.info.delta0 > 0 {
			c.MDS = c.info.delta0 * slopeStd
		}
	}
	c.drift = &driftLink{gauge: proto.Label, rhoTime: (e - t0*f) / math.Sqrt(den*f)}
	return c, true
}

// driftSlope returns the weighted least-squares slope of the per-epoch
// biases n_k / d_k on the times t_k with weights d_k, and its standard
// deviation, from the sums b = sum n_k, a = sum t_k n_k, f = sum d_k, e =
// sum t_k d_k, cc = sum t_k^2 d_k (the normal equations of a straight line,
// solved in closed form).
func driftSlope(b, a, f, e, cc float64) (slope, std float64) {
	det := f*cc - e*e
	return (f*a - e*b) / det, math.Sqrt(f / det)
}
