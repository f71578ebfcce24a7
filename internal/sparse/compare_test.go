package sparse

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"
)

// The comparison with scipy (a general-purpose reference library) needs
// Debian's python3-scipy, served to /usr/bin/python3 (the default python3
// on the path may be another installation without it).
const scipyPython = "/usr/bin/python3"

// requireScipy skips the test when python3-scipy is missing, or fails it
// when TRUSSMON_REQUIRE_TOOLS=1.
func requireScipy(t *testing.T) {
	t.Helper()
	out, err := exec.Command(scipyPython, "-c", "import scipy.sparse.linalg, scipy.linalg, scipy.io").CombinedOutput()
	if err == nil {
		return
	}
	msg := fmt.Sprintf("needs python3-scipy for %s (apt-get install -y python3-scipy): %v %s", scipyPython, err, out)
	if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

// requireCholmod skips the test when gcc or CHOLMOD's header (Debian's
// libsuitesparse-dev) is missing, or fails it when TRUSSMON_REQUIRE_TOOLS=1.
func requireCholmod(t *testing.T) {
	t.Helper()
	_, errGCC := exec.LookPath("gcc")
	_, errH := os.Stat("/usr/include/suitesparse/cholmod.h")
	if errGCC == nil && errH == nil {
		return
	}
	msg := fmt.Sprintf("needs gcc and CHOLMOD for the comparison (apt-get install -y gcc libsuitesparse-dev): %v %v", errGCC, errH)
	if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

// compareEntry is one line of results.json read by compare.py.
type compareEntry struct {
	Name      string  `json:"name"`
	Matrix    string  `json:"matrix"`
	RHS       string  `json:"rhs"`
	Solution  string  `json:"solution"`
	DOF       int     `json:"dof"`
	Method    string  `json:"method"`
	Ordering  string  `json:"ordering"`
	NNZL      int     `json:"nnz_l"`
	NNZLExact int     `json:"nnz_l_exact"`
	OrderS    float64 `json:"order_s"`
	FactorS   float64 `json:"factor_s"`
	SolveS    float64 `json:"solve_s"`
}

// writeMatrixMarket writes the lower triangle of a as a symmetric
// MatrixMarket coordinate file (NIST MatrixMarket exchange format).
func writeMatrixMarket(path string, a *Sym) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(f, 1<<20)
	fmt.Fprintf(w, "%%%%MatrixMarket matrix coordinate real symmetric\n%d %d %d\n", a.N(), a.N(), a.NNZLower())
	for r := 0; r < a.N(); r++ {
		for q := a.p[r]; q < a.p[r+1]; q++ {
			if c := int(a.i[q]); c <= r {
				w.WriteString(strconv.Itoa(r + 1))
				w.WriteByte(' ')
				w.WriteString(strconv.Itoa(c + 1))
				w.WriteByte(' ')
				w.WriteString(strconv.FormatFloat(a.v[q], 'g', 17, 64))
				w.WriteByte('\n')
			}
		}
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func writeVector(path string, x []float64) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriter(f)
	for _, v := range x {
		w.WriteString(strconv.FormatFloat(v, 'g', 17, 64))
		w.WriteByte('\n')
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// solveForCompare factors a with opt (the fastest of repeat runs), solves
// for a seeded random load vector and writes matrix, load and solution.
func solveForCompare(t *testing.T, dir, name string, a *Sym, opt Options, repeat int) compareEntry {
	t.Helper()
	rng := rand.New(rand.NewPCG(11, 13))
	b := make([]float64, a.N())
	for i := range b {
		b[i] = rng.NormFloat64() * 1e3 // nodal forces of the order of kN
	}
	x := make([]float64, a.N())
	e := compareEntry{Name: name, Matrix: name + ".mtx", RHS: name + ".rhs", Solution: name + ".x", DOF: a.N()}
	for r := 0; r < repeat; r++ {
		f, err := Factorize(a, opt)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		t0 := time.Now()
		f.Solve(x, b)
		solve := time.Since(t0).Seconds()
		st := f.Stats()
		if r == 0 || st.OrderTime.Seconds()+st.FactorTime.Seconds() < e.OrderS+e.FactorS {
			e.OrderS, e.FactorS = st.OrderTime.Seconds(), st.FactorTime.Seconds()
		}
		if r == 0 || solve < e.SolveS {
			e.SolveS = solve
		}
		e.Method, e.Ordering, e.NNZL, e.NNZLExact = st.Method.String(), st.Ordering.String(), st.NNZL, st.NNZLExact
	}
	for _, err := range []error{
		writeMatrixMarket(filepath.Join(dir, e.Matrix), a),
		writeVector(filepath.Join(dir, e.RHS), b),
		writeVector(filepath.Join(dir, e.Solution), x),
	} {
		if err != nil {
			t.Fatal(err)
		}
	}
	return e
}

// runCompare writes results.json and runs compare.py on it.
func runCompare(t *testing.T, dir string, entries []compareEntry, timeout time.Duration, args ...string) string {
	t.Helper()
	js, err := json.MarshalIndent(entries, "", " ")
	if err != nil {
		t.Fatal(err)
	}
	res := filepath.Join(dir, "results.json")
	if err := os.WriteFile(res, js, 0o644); err != nil {
		t.Fatal(err)
	}
	script, err := filepath.Abs(filepath.Join("..", "..", "scripts", "solvercompare", "compare.py"))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	cmd := exec.CommandContext(ctx, scipyPython, append([]string{script, res}, args...)...)
	// One BLAS thread, as the Go solver runs on one core for these
	// kernels; OPENBLAS_CORETYPE and the rest of the environment are left
	// as the machine has them.
	cmd.Env = append(os.Environ(), "OPENBLAS_NUM_THREADS=1")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("compare.py: %v\n%s", err, out)
	}
	return string(out)
}

// TestAgainstScipy solves small truss stiffness systems with every method
// and checks the solutions against scipy's SuperLU and banded LAPACK
// Cholesky to 1e-10 relative (compare.py fails on a larger difference).
func TestAgainstScipy(t *testing.T) {
	requireScipy(t)
	dir := t.TempDir()
	g, _ := doubleLayerGrid(6, 4).stiffness()
	br, _ := boxBridge(30, 4).stiffness()
	var entries []compareEntry
	for _, m := range []Method{Dense, Band, Supernodal} {
		entries = append(entries,
			solveForCompare(t, dir, "grid6-"+m.String(), g, Options{Method: m}, 1),
			solveForCompare(t, dir, "bridge30-"+m.String(), br, Options{Method: m}, 1))
	}
	out := runCompare(t, dir, entries, 2*time.Minute, "--repeat", "1", "--max-diff", "1e-10", "--max-backward", "1e-14")
	t.Log("\n" + out)
}

// TestCompareWithScipy times the Go solver (Auto), scipy (up to 150k
// DOF) and CHOLMOD (SuiteSparse, through scripts/solvercompare's C
// program) on the benchmark matrices, 1k to 300k DOF, and prints the
// side-by-side tables. It takes minutes and about 2 GB, so it runs only
// with TRUSSMON_SOLVER_COMPARE=1:
//
//	TRUSSMON_SOLVER_COMPARE=1 go test -v -run TestCompareWithScipy -timeout 60m ./internal/sparse/
func TestCompareWithScipy(t *testing.T) {
	if os.Getenv("TRUSSMON_SOLVER_COMPARE") != "1" {
		t.Skip("takes minutes; set TRUSSMON_SOLVER_COMPARE=1 to run the timing comparison with scipy")
	}
	requireScipy(t)
	requireCholmod(t)
	dir := t.TempDir()
	var entries []compareEntry
	for _, c := range benchCases() {
		if only := os.Getenv("TRUSSMON_SOLVER_COMPARE_ONLY"); only != "" && !slices.Contains(strings.Split(only, ","), c.name) {
			continue
		}
		entries = append(entries, solveForCompare(t, dir, c.name, c.matrix(), Options{}, 3))
		c.forget()
	}
	out := runCompare(t, dir, entries, 50*time.Minute, "--repeat", "2", "--max-backward", "1e-13", "--cholmod")
	t.Log("\n" + out)
	if p := os.Getenv("TRUSSMON_SOLVER_COMPARE_OUT"); p != "" {
		if err := os.WriteFile(p, []byte(out), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}
