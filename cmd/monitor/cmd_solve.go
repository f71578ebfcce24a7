package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"

	"trussmonitor/internal/model"
	"trussmonitor/internal/structfile"
	"trussmonitor/internal/units"
)

// runSolve implements "monitor solve FILE --case NAME [--json]": member
// forces and stresses, node displacements, reactions and the equilibrium
// check of one load case, as a table or as one JSON object (SI units).
func runSolve(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("solve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	caseName := fs.String("case", "", "load case to solve (required when the file has several)")
	asJSON := fs.Bool("json", false, "print one JSON object (SI units) instead of tables")
	unitFlag := fs.String("units", "", "units of the tables: si (kN, MPa, mm) or us (kip, ksi, in); default the system of the file's declared units")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor solve STRUCTURE.yaml --case NAME [--json] [--units si|us]")
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
		fmt.Fprintf(stderr, "monitor solve: %v\n", err)
		return 1
	}
	system := s.Units
	if *unitFlag != "" {
		if system, err = units.ParseSystem(*unitFlag); err != nil {
			fmt.Fprintf(stderr, "monitor solve: --units: %v\n", err)
			return 2
		}
	}
	name := *caseName
	if name == "" {
		if len(s.Cases) != 1 {
			fmt.Fprintf(stderr, "monitor solve: %s has %d load cases; choose one with --case (%s)\n", pos[0], len(s.Cases), structureCaseNames(s))
			return 2
		}
		name = s.Cases[0].Name
	}
	m, err := model.Analyze(s)
	if err != nil {
		fmt.Fprintf(stderr, "monitor solve: %v\n", err)
		return 1
	}
	r, err := m.SolveCase(name)
	if err != nil {
		fmt.Fprintf(stderr, "monitor solve: %v\n", err)
		return 1
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(solveJSON(s, name, r)); err != nil {
			fmt.Fprintf(stderr, "monitor solve: writing JSON: %v\n", err)
			return 1
		}
		if !r.Equilibrium.OK() {
			return 1
		}
		return 0
	}
	writeSolveTables(stdout, s, name, r, units.OutputOf(system))
	if !r.Equilibrium.OK() {
		fmt.Fprintf(stderr, "monitor solve: equilibrium FAILED: backward error %.1e above the limit %.1e; the result is wrong\n", r.Equilibrium.BackwardError, r.Equilibrium.Limit)
		return 1
	}
	return 0
}

func structureCaseNames(s *model.Structure) string {
	out := ""
	for i, c := range s.Cases {
		if i > 0 {
			out += ", "
		}
		out += c.Name
	}
	if out == "" {
		return "none defined"
	}
	return out
}

// solveOutput is the JSON form of one solved case (SI units).
type solveOutput struct {
	Structure   string            `json:"structure"`
	Case        string            `json:"case"`
	Members     []memberOutput    `json:"members"`
	Nodes       []nodeOutput      `json:"nodes"`
	Reactions   []reactionOutput  `json:"reactions"`
	Equilibrium equilibriumOutput `json:"equilibrium"`
}

type memberOutput struct {
	ID       string  `json:"id"`
	ForceN   float64 `json:"force_n"`
	StressPa float64 `json:"stress_pa"`
}

type nodeOutput struct {
	ID           string    `json:"id"`
	Displacement []float64 `json:"displacement_m"`
}

type reactionOutput struct {
	Node   string    `json:"node"`
	ForceN []float64 `json:"force_n"`
}

type equilibriumOutput struct {
	MaxImbalanceN float64   `json:"max_imbalance_n"`
	Relative      float64   `json:"relative"`
	BackwardError float64   `json:"backward_error"`
	Limit         float64   `json:"backward_error_limit"`
	OK            bool      `json:"ok"`
	Joint         string    `json:"joint"`
	GlobalN       []float64 `json:"global_n"`
}

func solveJSON(s *model.Structure, name string, r *model.Result) solveOutput {
	d := s.Dim
	out := solveOutput{Structure: s.Name, Case: name,
		Members: []memberOutput{}, Nodes: []nodeOutput{}, Reactions: []reactionOutput{}}
	for e, mb := range s.Members {
		out.Members = append(out.Members, memberOutput{ID: mb.ID, ForceN: r.Forces[e], StressPa: r.Stresses[e]})
	}
	for i, n := range s.Nodes {
		out.Nodes = append(out.Nodes, nodeOutput{ID: n.ID, Displacement: append([]float64(nil), r.Displacements[i][:d]...)})
	}
	for _, re := range r.Reactions {
		out.Reactions = append(out.Reactions, reactionOutput{Node: re.ID, ForceN: append([]float64(nil), re.Force[:d]...)})
	}
	eq := r.Equilibrium
	out.Equilibrium = equilibriumOutput{MaxImbalanceN: eq.MaxImbalanceN, Relative: eq.Relative, BackwardError: eq.BackwardError, Limit: eq.Limit, OK: eq.OK(), Joint: eq.Joint, GlobalN: append([]float64(nil), eq.GlobalN[:d]...)}
	return out
}

// writeSolveTables prints one case as tables in the output units u
// (kN, MPa, mm or kip, ksi, in).
func writeSolveTables(w io.Writer, s *model.Structure, name string, r *model.Result, u units.Output) {
	axes := "xyz"[:s.Dim]
	fmt.Fprintf(w, "structure %s, load case %s (units: force %s, stress %s, displacement %s)\n\n", s.Name, name, u.Force.Symbol, u.Stress.Symbol, u.Displacement.Symbol)
	fmt.Fprintf(w, "%-10s %14s %12s\n", "member", "force "+u.Force.Symbol, "stress "+u.Stress.Symbol)
	for e, mb := range s.Members {
		fmt.Fprintf(w, "%-10s %14.3f %12.2f\n", mb.ID, noNegZero(u.Force.FromSI(r.Forces[e]), 3), noNegZero(u.Stress.FromSI(r.Stresses[e]), 2))
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "%-10s", "node")
	for _, a := range axes {
		fmt.Fprintf(w, " %12s", "u"+string(a)+" "+u.Displacement.Symbol)
	}
	fmt.Fprintln(w)
	for i, n := range s.Nodes {
		fmt.Fprintf(w, "%-10s", n.ID)
		for k := range axes {
			fmt.Fprintf(w, " %12.4f", noNegZero(u.Displacement.FromSI(r.Displacements[i][k]), 4))
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "%-10s", "reaction")
	for _, a := range axes {
		fmt.Fprintf(w, " %12s", "R"+string(a)+" "+u.Force.Symbol)
	}
	fmt.Fprintln(w)
	for _, re := range r.Reactions {
		fmt.Fprintf(w, "%-10s", re.ID)
		for k := range axes {
			fmt.Fprintf(w, " %12.3f", noNegZero(u.Force.FromSI(re.Force[k]), 3))
		}
		fmt.Fprintln(w)
	}
	eq := r.Equilibrium
	verdict := "ok"
	if !eq.OK() {
		verdict = "FAILED: not the exact solution of any nearby problem"
	}
	fmt.Fprintf(w, "\nequilibrium: backward error %.1e (limit %.1e): %s; largest joint imbalance %.2e %s at %s, relative %.1e\n", eq.BackwardError, eq.Limit, verdict, u.Force.FromSI(eq.MaxImbalanceN), u.Force.Symbol, eq.Joint, eq.Relative)
	fmt.Fprintln(w, "\nThis tool is a monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes.")
}

// noNegZero returns 0 for values that print as zero with the given number
// of decimals, so that rounding noise does not print as "-0.000".
func noNegZero(v float64, decimals int) float64 {
	if math.Abs(v) < 0.5*math.Pow(10, -float64(decimals)) {
		return 0
	}
	return v
}
