package calib

import "math"

// MeanStrain is the mean of the strains of the gauges on one member. Gauges
// placed symmetrically about the section's centroid (for example on opposite
// faces) see the bending strain with opposite signs, so the mean is the
// axial strain:
//
//	e_axial = (1/n) sum e_i
//
// NaN for no gauges.
func MeanStrain(strains []float64) float64 {
	if len(strains) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, e := range strains {
		s += e
	}
	return s / float64(len(strains))
}

// MeanStrainSigma is the standard deviation of MeanStrain for independent
// gauge noise sigma_i:
//
//	sigma_mean = sqrt(sum sigma_i^2) / n
func MeanStrainSigma(sigmas []float64) float64 {
	if len(sigmas) == 0 {
		return math.NaN()
	}
	s := 0.0
	for _, v := range sigmas {
		s += v * v
	}
	return math.Sqrt(s) / float64(len(sigmas))
}

// MemberForce is the axial force of a linear-elastic member (Hooke's law
// times the area), tension positive:
//
//	N = E A e_axial
func MemberForce(e, a, strain float64) float64 {
	return e * a * strain
}

// MemberForceSigma is the standard deviation of MemberForce from the
// standard deviation of the axial strain: sigma_N = E A sigma_e.
func MemberForceSigma(e, a, strainSigma float64) float64 {
	return e * a * strainSigma
}
