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
//     1996) and a supernodal multifrontal Cholesky (Duff and Reid 1983; Liu
//     1992) with dense blocked kernels, for wide grids such as roofs.
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
