package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"strings"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/structfile"
)

// runCheck implements "monitor check FILE": it reads the structure file,
// analyses it and prints a summary (determinacy, stability, equilibrium,
// extreme member forces per case, and the method-of-joints cross-check for
// determinate plane trusses). It exits 1 when the file is invalid or the
// truss is a mechanism.
func runCheck(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("check", flag.ContinueOnError)
	fs.SetOutput(stderr)
	sensorsPath := fs.String("sensors", "", "sensor map of the structure: adds the detectability of every gauged member (redundancy, MDB, best additional gauge)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor check STRUCTURE.yaml [--sensors SENSORS.yaml]")
		fmt.Fprintln(stderr, "Validates a structure file and prints stability, determinacy, equilibrium and extreme member forces per load case.")
		fs.PrintDefaults()
	}
	pos, err := parseInterspersed(fs, args)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if len(pos) != 1 {
		fs.Usage()
		return 2
	}
	s, err := structfile.LoadFile(pos[0])
	if err != nil {
		fmt.Fprintf(stderr, "monitor check: %v\n", err)
		return 1
	}
	var sm *sensors.Map
	if *sensorsPath != "" {
		if sm, err = instrumented.ReadSensorsFor(*sensorsPath, s, pos[0]); err != nil {
			fmt.Fprintf(stderr, "monitor check: %v\n", err)
			return 1
		}
	}
	chk, err := model.CheckStructure(s)
	if err != nil {
		fmt.Fprintf(stderr, "monitor check: %v\n", err)
		return 1
	}
	rep := &checkReport{StructureCheck: chk}
	if sec, err := capacitySection(rep); err != nil {
		fmt.Fprintf(stderr, "monitor check: %v\n", err)
		return 1
	} else if sec != nil {
		rep.Extra = append(rep.Extra, sec) // check_capacity.go
	}
	if sm != nil && rep.Model != nil {
		det, err := reconcile.LayoutDetectability(rep.Model, sm, reconcile.Options{})
		if err != nil {
			fmt.Fprintf(stderr, "monitor check: %s: %v\n", *sensorsPath, err)
			return 1
		}
		rep.Extra = append(rep.Extra, func(w io.Writer) { fmt.Fprintln(w); writeDetectability(w, det) })
	}
	rep.Write(stdout)
	if rep.Mechanism != nil {
		fmt.Fprintf(stderr, "monitor check: %v\n", rep.Mechanism)
		return 1
	}
	if bad := rep.EquilibriumFailures(); len(bad) > 0 {
		fmt.Fprintf(stderr, "monitor check: equilibrium FAILED in %s: the solution is not the exact solution of any nearby problem (backward error above %.1e); report the structure file with this output\n", strings.Join(bad, ", "), rep.Cases[0].Equilibrium.Limit)
		return 1
	}
	return 0
}

// parseInterspersed parses flags that may come before or after the
// positional arguments and returns the positionals.
func parseInterspersed(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

// checkReport is the content of "monitor check": the analysis of the
// structure (model.CheckStructure) and further sections (for example
// detectability per member from a sensor map) appended to Extra.
type checkReport struct {
	*model.StructureCheck
	// Extra sections are printed after the built-in ones.
	Extra []func(w io.Writer)
}

// Write prints the report.
func (r *checkReport) Write(w io.Writer) {
	s := r.Structure
	fmt.Fprintf(w, "structure   %s\n", s.Name)
	if s.Title != "" {
		fmt.Fprintf(w, "title       %s\n", s.Title)
	}
	if s.File != "" {
		fmt.Fprintf(w, "file        %s\n", s.File)
	}
	kind := "plane truss"
	if s.Dim == 3 {
		kind = "space truss"
	}
	fmt.Fprintf(w, "dimension   %d (%s)\n", s.Dim, kind)
	fmt.Fprintf(w, "nodes       %d\n", len(s.Nodes))
	fmt.Fprintf(w, "members     %d\n", len(s.Members))
	fmt.Fprintf(w, "supports    %d (%s)\n", len(s.Supports), supportSummary(s))
	fmt.Fprintf(w, "patterns    %d, cases %d\n", len(s.Patterns), len(s.Cases))
	fmt.Fprintln(w)
	writeGeometry(w, s, r.Geometry)
	fmt.Fprintln(w)

	d := r.Determinacy
	fmt.Fprintln(w, "determinacy")
	fmt.Fprintf(w, "  by counting  m + r - %d j = %d + %d - %d x %d = %d\n", s.Dim, d.Members, d.Reactions, s.Dim, d.Joints, d.ByCounting)
	fmt.Fprintf(w, "  by rank      %d (mechanisms %d)\n", d.ByRank, d.Mechanisms)
	agree := "yes"
	if !d.Agree {
		agree = "no"
	}
	fmt.Fprintf(w, "  agree        %s: %s\n", agree, d.Note)
	fmt.Fprintln(w)

	if r.Mechanism != nil {
		fmt.Fprintln(w, "stability   UNSTABLE (mechanism)")
		for i, fm := range r.Mechanism.Motions {
			fmt.Fprintf(w, "  free motion %d: %s\n", i+1, fm.String())
		}
		if r.Mechanism.Partial {
			fmt.Fprintln(w, "  (further free motions may exist; the model is too large to list them all)")
		}
		fmt.Fprintln(w, "  add members or restraints to stop the motion; no load case was solved")
		r.writeExtra(w)
		return
	}
	fmt.Fprintf(w, "stability   stable (%d free DOFs)\n", r.Model.FreeDOFs())
	fmt.Fprintln(w)

	worst, worstRel, limit := 0.0, 0.0, 0.0
	for _, c := range r.Cases {
		if c.Err != nil {
			continue
		}
		worst = math.Max(worst, c.Equilibrium.BackwardError)
		worstRel = math.Max(worstRel, c.Equilibrium.Relative)
		limit = c.Equilibrium.Limit
	}
	verdict := "ok"
	if len(r.EquilibriumFailures()) > 0 {
		verdict = "FAILED: not the exact solution of any nearby problem"
	}
	fmt.Fprintf(w, "equilibrium largest backward error over all cases %.1e (limit 10 n u = %.1e, n = %d free DOFs, u = 2^-53): %s\n", worst, limit, r.Model.FreeDOFs(), verdict)
	fmt.Fprintf(w, "            largest joint imbalance %.1e of the largest load (grows with the stiffness ratio of the members; not the verdict)\n", worstRel)
	fmt.Fprintln(w)

	width := 4
	for _, c := range r.Cases {
		width = max(width, len(c.Name))
	}
	fmt.Fprintln(w, "load cases (member forces, tension positive)")
	for _, c := range r.Cases {
		if c.Err != nil {
			fmt.Fprintf(w, "  %-*s ERROR %v\n", width, c.Name, c.Err)
			continue
		}
		fmt.Fprintf(w, "  %-*s %s, %s, backward error %.1e\n",
			width, c.Name, extremeText("tension", c.MaxTension, c.MaxTensionMember), extremeText("compression", c.MaxCompression, c.MaxCompressionMember), c.Equilibrium.BackwardError)
	}
	fmt.Fprintln(w)

	fmt.Fprintln(w, "method of joints cross-check")
	if len(r.Joints) == 0 {
		fmt.Fprintf(w, "  %s\n", r.JointsNote)
	}
	for _, j := range r.Joints {
		if j.Err != nil {
			fmt.Fprintf(w, "  %-*s ERROR %v\n", width, j.Case, j.Err)
			continue
		}
		if j.MaxForceN < 1e-3 {
			fmt.Fprintf(w, "  %-*s largest difference %.1e N in %s (all member forces are zero to rounding)\n", width, j.Case, j.MaxDiffN, j.Member)
			continue
		}
		fmt.Fprintf(w, "  %-*s largest difference %.1e N (%.1e of the largest force) in %s\n", width, j.Case, j.MaxDiffN, j.MaxDiffN/j.MaxForceN, j.Member)
	}
	r.writeExtra(w)
	fmt.Fprintln(w)
	fmt.Fprintln(w, "This tool is a monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes.")
}

func (r *checkReport) writeExtra(w io.Writer) {
	for _, f := range r.Extra {
		fmt.Fprintln(w)
		f(w)
	}
}

// supportSummary describes the supports, e.g. "L0 fixed x y; L8 fixed y, spring x".
func supportSummary(s *model.Structure) string {
	var parts []string
	for _, sp := range s.Supports {
		var fx, sx []string
		for k := 0; k < s.Dim; k++ {
			if sp.Fixed[k] {
				fx = append(fx, "xyz"[k:k+1])
			}
			if sp.Spring[k] != 0 {
				sx = append(sx, "xyz"[k:k+1])
			}
		}
		var d []string
		if len(fx) > 0 {
			d = append(d, "fixed "+strings.Join(fx, " "))
		}
		if sp.Normal != nil {
			d = append(d, "inclined roller")
		}
		if len(sx) > 0 {
			d = append(d, "spring "+strings.Join(sx, " "))
		}
		parts = append(parts, s.Nodes[sp.Node].ID+" "+strings.Join(d, ", "))
	}
	if len(parts) > 8 {
		return strings.Join(parts[:8], "; ") + fmt.Sprintf("; ... %d more", len(parts)-8)
	}
	return strings.Join(parts, "; ")
}

// extremeText is "max tension 12.000 kN in B4", or "no member in tension"
// when no member carries a force of that sign.
func extremeText(kind string, n float64, member string) string {
	if member == "" || math.Abs(n) < 0.5 {
		return "no member in " + kind
	}
	return fmt.Sprintf("max %s %s in %s", kind, formatKN(n), member)
}

// writeGeometry prints the extents, the shortest and longest member, the
// total self-weight and the plausibility warnings.
func writeGeometry(w io.Writer, s *model.Structure, g model.Geometry) {
	fmt.Fprintln(w, "geometry")
	axes := "xyz"[:s.Dim]
	for k, a := range axes {
		fmt.Fprintf(w, "  extent %c     %.3f m to %.3f m (%.3f m)\n", a, g.Min[k], g.Max[k], g.Max[k]-g.Min[k])
	}
	if g.Shortest >= 0 {
		fmt.Fprintf(w, "  shortest     %s, %.3f m\n", s.Members[g.Shortest].ID, g.ShortestM)
		fmt.Fprintf(w, "  longest      %s, %.3f m\n", s.Members[g.Longest].ID, g.LongestM)
	}
	fmt.Fprintf(w, "  self-weight  %.3f kN (members, sum density A L g)", g.SelfWeightN/1e3)
	if g.NoDensity > 0 {
		fmt.Fprintf(w, "; %d member(s) without a density are not included", g.NoDensity)
	}
	fmt.Fprintln(w)
	if len(g.Warnings) == 0 {
		fmt.Fprintf(w, "  sizes        plausible (members %g mm to %g m, coordinates within %g km: common practice)\n", model.PlausibleMinMemberM*1e3, model.PlausibleMaxMemberM, model.PlausibleMaxCoordinateM/1e3)
		return
	}
	for _, wn := range g.Warnings {
		fmt.Fprintf(w, "  WARNING      %s\n", wn)
	}
	fmt.Fprintf(w, "  (plausible: members %g mm to %g m, coordinates within %g km of the origin; common practice)\n", model.PlausibleMinMemberM*1e3, model.PlausibleMaxMemberM, model.PlausibleMaxCoordinateM/1e3)
}

// formatKN formats a force in newtons as kilonewtons (rounding noise shows as 0).
func formatKN(n float64) string {
	if math.Abs(n) < 0.5 {
		n = 0
	}
	return fmt.Sprintf("%.3f kN", n/1e3)
}
