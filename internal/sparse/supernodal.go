package sparse

import "errors"

func factorSupernodal(a *Sym, perm []int, tol float64, st *Stats) (factor, error) {
	return nil, errors.New("sparse: supernodal factorisation is not implemented yet; use Band or Dense")
}

// AMD returns an approximate minimum degree ordering of a.
func AMD(a *Sym) []int {
	return RCM(a.Adjacency())
}

func factorizeAuto(a *Sym, ord Ordering, tol float64) (*Cholesky, error) {
	m := Band
	if a.n <= 200 {
		m = Dense
	}
	return Factorize(a, Options{Method: m, Ordering: ord, PivotTol: tol})
}
