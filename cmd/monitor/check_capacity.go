package main

import (
	"fmt"
	"io"
	"math"
	"strings"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/model"
)

// capacitySection returns the `monitor check` section of member
// resistances and their utilisation under each load case, or nil when the
// structure declares no design basis or could not be solved.
func capacitySection(rep *checkReport) (func(w io.Writer), error) {
	s, m := rep.Structure, rep.Model
	if s.Design == nil || m == nil {
		return nil, nil
	}
	res, err := s.Resistances()
	if err != nil {
		return nil, err
	}
	cases := s.Cases
	if len(cases) == 0 {
		for _, p := range s.Patterns {
			cases = append(cases, model.Case{Name: "pattern " + p.Name, Factors: []model.Factor{{Pattern: p.Name, Factor: 1}}})
		}
	}
	util := make([][]float64, len(cases)) // case -> member
	for c, lc := range cases {
		r, err := m.SolveFactors(lc.Factors)
		if err != nil {
			continue // reported in the load-case section
		}
		if util[c], err = s.Utilisations(r.Forces); err != nil {
			return nil, err
		}
	}
	return func(w io.Writer) { writeCapacity(w, s, res, cases, util) }, nil
}

// writeCapacity prints one row per member: buckling length, slenderness,
// the standard's intermediate values, the tension and compression
// resistances and the utilisation under each load case.
func writeCapacity(w io.Writer, s *model.Structure, res []capacity.Resistance, cases []model.Case, util [][]float64) {
	d := s.Design
	switch d.Standard {
	case capacity.EN1993:
		fmt.Fprintf(w, "member resistance (%s, gamma_M0 %.2f, gamma_M1 %.2f): tension N_pl,Rd = A fy / gamma_M0 (6.2.3), compression N_b,Rd = chi A fy / gamma_M1 (6.3.1, weaker axis)\n",
			d.Standard, d.GammaM0, d.GammaM1)
	default:
		fmt.Fprintf(w, "member resistance (%s): tension 0.90 Fy Ag (D2), compression 0.90 Fcr Ag (E3, weaker axis)\n", d.Standard)
	}
	fmt.Fprintln(w, "utilisation = |N| / resistance under each load case (tension or compression as the force's sign gives)")
	idw := len("member")
	for _, mb := range s.Members {
		idw = max(idw, len(mb.ID))
	}
	head := fmt.Sprintf("  %-*s %8s %7s", idw, "member", "L_cr m", "L_cr/i")
	if d.Standard == capacity.EN1993 {
		head += fmt.Sprintf(" %6s %5s %5s", "lambda", "curve", "chi")
	} else {
		head += fmt.Sprintf(" %9s", "Fcr MPa")
	}
	head += fmt.Sprintf(" %11s %11s", "tension kN", "compr. kN")
	cw := make([]int, len(cases))
	for c, lc := range cases {
		cw[c] = max(len(lc.Name), 6)
		head += fmt.Sprintf(" %*s", cw[c], lc.Name)
	}
	fmt.Fprintln(w, head)
	worst, worstMember, worstCase := 0.0, "", ""
	for k, mb := range s.Members {
		r := res[k]
		row := fmt.Sprintf("  %-*s %8.3f %7.1f", idw, mb.ID, s.EffectiveBucklingLength(k), r.Slenderness)
		if d.Standard == capacity.EN1993 {
			row += fmt.Sprintf(" %6.3f %5s %5.3f", r.RelativeSlenderness, mb.Curve, r.Chi)
		} else {
			row += fmt.Sprintf(" %9.1f", r.CriticalStressPa/1e6)
		}
		row += fmt.Sprintf(" %11.1f %11.1f", r.TensionN/1e3, r.CompressionN/1e3)
		for c := range cases {
			if util[c] == nil {
				row += fmt.Sprintf(" %*s", cw[c], "–")
				continue
			}
			u := util[c][k]
			row += fmt.Sprintf(" %*.3f", cw[c], u)
			if u > worst {
				worst, worstMember, worstCase = u, mb.ID, cases[c].Name
			}
		}
		fmt.Fprintln(w, strings.TrimRight(row, " "))
	}
	if worstMember != "" && !math.IsNaN(worst) {
		fmt.Fprintf(w, "  largest utilisation %.3f in %s under %s\n", worst, worstMember, worstCase)
	}
	fmt.Fprintln(w, capacity.Caution)
}
