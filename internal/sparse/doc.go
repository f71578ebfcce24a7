// Package sparse holds symmetric sparse matrices and the Cholesky
// factorisations that solve the truss stiffness equations K u = f.
//
// A matrix is assembled with a Builder (duplicates are summed, as in the
// direct stiffness method) and compressed into a Sym. Factorize chooses an
// ordering and a method:
//
//   - Dense: a blocked Cholesky of the full matrix, for tiny models.
//   - Band: reverse Cuthill-McKee ordering (Cuthill and McKee 1969, reversed by
//     George 1971) and a banded Cholesky (gonum's LAPACK Pbtrf), for narrow
//     structures such as long bridges, where the cost is linear in size.
//   - Supernodal: approximate minimum degree ordering (Amestoy, Davis and Duff
//     1996) or nested dissection (George 1973, with level-structure
//     separators after George and Liu 1981, chapter 8, improved by a
//     vertex-separator Fiduccia-Mattheyses refinement, 1982; see ND) and a
//     supernodal multifrontal Cholesky (Duff and Reid 1983; Liu 1992) with
//     dense blocked kernels, for wide grids such as roofs.
//
// Method Auto decides from two cheap numbers, the order n and the
// half-bandwidth k after RCM (computed on the graph of the joints), and
// computes only the ordering of the method it picks:
//
//   - n <= 40: Dense.
//   - k <= 64, or n·k² <= 4e7: Band. A long bridge has k = 20 at any length.
//   - 64 < k < 240: Supernodal after minimum degree.
//   - k >= 240: Supernodal after nested dissection (a square roof grid has
//     k = 248 at 10k unknowns, 1346 at 300k).
//
// The switch points are where the band work n·k² met the supernodal work
// Σ c_j² (c_j the column counts of L) after minimum degree on roof strips
// of fixed width (k = 53..77), and where nested dissection's Σ c_j² fell
// below minimum degree's (k = 197..248); the measurements are listed
// beside the thresholds in supernodal.go.
//
// Dense and supernodal factorisations share one blocked kernel (C -= A Bᵀ),
// written in AVX2/FMA assembly on amd64 processors that have it and in
// plain Go elsewhere.
//
// The factor is computed once and reused for every right-hand side; SolveMany
// solves a block of right-hand sides at once.
//
// A pivot that is not clearly positive is reported as a
// NotPositiveDefiniteError naming the row in the caller's numbering, so a
// mechanism in a truss is an error and never a NaN.
package sparse
