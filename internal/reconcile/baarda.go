package reconcile

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// CriticalW returns the critical value k of Baarda's two-sided w-test of
// size alpha0: k = Phi^-1(1 - alpha0/2), with Phi the standard normal
// distribution function (gonum distuv.UnitNormal). For alpha0 = 0.001 it is
// 3.2905 (Baarda 1968, A testing procedure for use in geodetic networks).
func CriticalW(alpha0 float64) (float64, error) {
	if !(alpha0 > 0 && alpha0 < 1) {
		return 0, fmt.Errorf("reconcile: local test size alpha0 = %v; want 0 < alpha0 < 1 (usually 0.001)", alpha0)
	}
	return distuv.UnitNormal.Quantile(1 - alpha0/2), nil
}

// NonCentrality returns Baarda's delta0: the shift of the mean of a w
// statistic (unit variance) at which the two-sided test of size alpha0
// rejects with probability beta (the power). It solves
//
//	P(|Z + delta0| > k) = Phi(delta0 - k) + Phi(-delta0 - k) = beta,  k = CriticalW(alpha0),
//
// by bisection on gonum's normal distribution function; it is the square
// root of the non-centrality lambda0 of the chi-square test with one degree
// of freedom. For alpha0 = 0.001 and beta = 0.80 it is 4.1321 (lambda0 =
// 17.07; Baarda 1968).
func NonCentrality(alpha0, beta float64) (float64, error) {
	k, err := CriticalW(alpha0)
	if err != nil {
		return 0, err
	}
	if !(beta > alpha0 && beta < 1) {
		return 0, fmt.Errorf("reconcile: power beta = %v; want alpha0 < beta < 1 (usually 0.80)", beta)
	}
	power := func(d float64) float64 {
		return distuv.UnitNormal.CDF(d-k) + distuv.UnitNormal.CDF(-d-k)
	}
	lo, hi := 0.0, k+10 // power(0) = alpha0 < beta, power(k+10) ~ 1 > beta
	for i := 0; i < 200 && hi-lo > 1e-13; i++ {
		mid := (lo + hi) / 2
		if power(mid) < beta {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2, nil
}

// MinimalDetectableBias returns MDB_i = sigma_i delta0 / sqrt(r_i), the
// smallest gross error in one observation that the w-test finds with the
// power behind delta0 (Baarda 1968, internal reliability). It returns 0 when
// r_i is zero (no bias in that observation is detectable at all).
func MinimalDetectableBias(sigma, delta0, redundancy float64) float64 {
	if redundancy <= tinyRedundancy {
		return 0
	}
	return sigma * delta0 / math.Sqrt(redundancy)
}
