package capacity

import "math"

// PhiAISC is the resistance factor of AISC 360-16 for tensile yielding
// (D2(a), phi_t) and for compression (E1, phi_c): 0.90.
const PhiAISC = 0.90

// TensileYieldStrength is the design tensile strength for yielding in the
// gross section, AISC 360-16 D2(a), equation (D2-1), with phi_t = 0.90:
//
//	phi_t P_n = 0.90 F_y A_g
//
// fy in Pa, ag in m^2; newtons.
func TensileYieldStrength(fy, ag float64) float64 {
	return PhiAISC * fy * ag
}

// ElasticBucklingStress is the elastic buckling stress of AISC 360-16 E3,
// equation (E3-4), for a slenderness Lc/r:
//
//	F_e = pi^2 E / (L_c / r)^2
func ElasticBucklingStress(e, slenderness float64) float64 {
	return math.Pi * math.Pi * e / (slenderness * slenderness)
}

// InelasticLimit is the slenderness 4.71 sqrt(E / F_y) of AISC 360-16 E3
// that separates inelastic (E3-2) from elastic (E3-3) buckling.
func InelasticLimit(e, fy float64) float64 {
	return 4.71 * math.Sqrt(e/fy)
}

// CriticalStress is the flexural buckling stress F_cr of AISC 360-16 E3:
//
//	F_cr = 0.658^(F_y / F_e) F_y   when L_c/r <= 4.71 sqrt(E/F_y)  (E3-2)
//	F_cr = 0.877 F_e                otherwise                       (E3-3)
func CriticalStress(e, fy, slenderness float64) float64 {
	fe := ElasticBucklingStress(e, slenderness)
	if slenderness <= InelasticLimit(e, fy) {
		return math.Pow(0.658, fy/fe) * fy
	}
	return 0.877 * fe
}

// CompressiveStrength is the design compressive strength for flexural
// buckling of a member without slender elements, AISC 360-16 E3,
// equation (E3-1), with phi_c = 0.90:
//
//	phi_c P_n = 0.90 F_cr A_g
func CompressiveStrength(fcr, ag float64) float64 {
	return PhiAISC * fcr * ag
}
