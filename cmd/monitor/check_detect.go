package main

import (
	"fmt"
	"io"
	"strings"

	"trussmonitor/internal/reconcile"
)

// writeDetectability prints the detectability report of `monitor check
// --sensors` as a readable table.
func writeDetectability(w io.Writer, r *reconcile.DetectReport) {
	fmt.Fprintf(w, "detectability (all gauges reporting; unknown loads estimated: %v; degrees of freedom %d; delta0 %.4f):\n", r.Unknown, r.DOF, r.Delta0)
	fmt.Fprintf(w, "  %-10s %12s %11s %12s  %s\n", "member", "sigma [kN]", "redundancy", "MDB [kN]", "checkable")
	var unchecked []string
	for _, m := range r.Members {
		check := "yes"
		mdb := fmt.Sprintf("%12.2f", m.MDBN/1e3)
		if !m.Checkable {
			check = "no: redundancy near zero, never alarms"
			mdb = fmt.Sprintf("%12s", "-")
			unchecked = append(unchecked, m.Member)
		}
		fmt.Fprintf(w, "  %-10s %12.2f %11.3f %s  %s\n", m.Member, m.SigmaN/1e3, m.Redundancy, mdb, check)
	}
	if len(unchecked) == 0 {
		fmt.Fprintln(w, "  every gauged member can be checked")
	} else {
		fmt.Fprintf(w, "  cannot be checked: %v\n", unchecked)
	}
	if len(r.Members) > 0 {
		weak := r.Members[r.Weakest]
		fmt.Fprintf(w, "  weakest member: %s (redundancy %.3f)\n", weak.Member, weak.Redundancy)
	}
	if len(r.Suggestions) > 0 {
		fmt.Fprintln(w, "  one additional gauge pair that raises the weakest redundancy most:")
		for _, s := range r.Suggestions {
			fmt.Fprintf(w, "    on %-10s weakest redundancy %.3f -> %.3f\n", s.Label, s.WeakestBefore, s.WeakestAfter)
		}
	}
	if r.Separability != nil {
		writeSeparability(w, r.Separability)
	}
}

// writeSeparability prints the design's groups of causes the gauges
// cannot tell apart and the untestable candidates.
func writeSeparability(w io.Writer, s *reconcile.Separability) {
	fmt.Fprintf(w, "separability of the candidate causes (stiffness signatures at %s; one group when |rho| >= %.3f, the w correlation at which two causes of minimal detectable size are ranked right with less than the test's power):\n", s.State, s.RhoMax)
	if len(s.Groups) == 0 {
		fmt.Fprintln(w, "  every testable cause can be told apart from every other")
	}
	for _, g := range s.Groups {
		fmt.Fprintf(w, "  cannot be told apart: %s\n", strings.Join(g.Labels, " | "))
		switch {
		case g.Gauge == "":
			fmt.Fprintln(w, "    no single additional gauge pair found")
		case g.Separates:
			fmt.Fprintf(w, "    a gauge pair on %s separates them (largest |rho| %.3f)\n", g.Gauge, g.MaxRho)
		case g.MaxRho > 0.9999:
			fmt.Fprintln(w, "    no single additional gauge pair separates them")
		default:
			fmt.Fprintf(w, "    no single additional gauge pair separates them (best: %s, largest |rho| %.3f)\n", g.Gauge, g.MaxRho)
		}
	}
	if len(s.Untestable) > 0 {
		fmt.Fprintf(w, "  untestable in one epoch (null projected signature, or minimal detectable size beyond the plausible range; never offered per epoch, still summed over the window), %d: %s\n", len(s.Untestable), strings.Join(s.Untestable, ", "))
	}
}
