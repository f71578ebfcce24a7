// Package reconcile fits the differences between measured and predicted
// member forces by weighted least squares, one epoch at a time, and tests
// them: the global chi-square test, Baarda's w-test per gauged member,
// redundancy numbers, minimal detectable biases and the ranking of candidate
// causes after a rejection (detection, identification, adaptation).
//
// Per epoch, with G gauged members (DESIGN.md, Reconciliation):
//
//	r       = y - y_hat                          residual against the model
//	theta   = (A^T W A)^-1 A^T W r               unknown load magnitudes
//	e       = r - A theta                        adjusted residuals
//	Q_e     = Sigma - A (A^T W A)^-1 A^T         residual cofactor
//	r_i     = (Q_e W)_ii                         redundancy numbers, sum G - p
//	T       = e^T W e ~ chi-square(G - p)        global test
//	w_i     = e_i / sqrt((Q_e)_ii)               Baarda's w-test (sigma_0 = 1)
//	MDB_i   = sigma_i delta0 / sqrt(r_i)         minimal detectable bias
//
// W = Sigma^-1 = diag(1/sigma_i^2). Internally everything is whitened
// (rows divided by sigma_i): with the thin QR factorisation W^1/2 A = Q R,
// W^1/2 Q_e W^1/2 = I - Q Q^T, so r_i = 1 - |Q_i|^2, and an epoch costs two
// products with the G x p matrix Q. Q, R^-1, r_i, MDB_i and the w
// normalisers depend only on which gauges reported (the availability mask)
// and are cached per mask.
//
// The reconciliation model of a structure with its sensor map is here too:
// the linear model of the prediction (linear.go), the per-epoch Processor
// (snapshot in, EpochResult out: fit, causes, adaptation, member state)
// and the detectability and separability of a gauge layout
// (LayoutDetectability).
package reconcile

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Defaults of Options.
const (
	// DefaultAlpha0 is the size of the local (w) test, Baarda's customary
	// alpha0 = 0.001 (critical value 3.29).
	DefaultAlpha0 = 0.001
	// DefaultPower is the power beta = 0.80 behind delta0 = 4.13 (Baarda 1968).
	DefaultPower = 0.80
	// DefaultAlphaGlobal is the size of the global chi-square test.
	DefaultAlphaGlobal = 0.001
	// DefaultMinRedundancy is the redundancy number below which a member
	// is not checkable. At r_i = 0.05 only 5 % of a gross error in that
	// gauge shows in its own residual (the other 95 % is absorbed by the
	// unknown loads and spread over the other members), its MDB is
	// delta0/sqrt(0.05) = 18.5 sigma, and a w alarm on it points at the
	// wrong place more often than not. Geodetic practice treats r_i < 0.1 as
	// weakly and r_i near 0 as not controlled (Foerstner 1987, from memory);
	// 0.05 keeps weakly controlled members checkable but flags them by their
	// large MDB.
	DefaultMinRedundancy = 0.05
	// DefaultRankTol is the relative size below which a column of the
	// whitened design, after removing its projection on the earlier
	// columns, counts as linearly dependent (unknown not identifiable).
	DefaultRankTol = 1e-9
	// DefaultCacheSize is the number of availability masks whose
	// precomputed quantities are kept.
	DefaultCacheSize = 16
)

// tinyRedundancy is the redundancy below which w_i and MDB_i are not
// defined (reported as 0): numerically zero.
const tinyRedundancy = 1e-12

// Options configures a Solver. The zero value means the defaults.
type Options struct {
	Alpha0        float64 // local w-test size; 0 means DefaultAlpha0
	Power         float64 // power beta for MDB; 0 means DefaultPower
	AlphaGlobal   float64 // global test size; 0 means DefaultAlphaGlobal
	MinRedundancy float64 // checkable when r_i >= this; 0 means DefaultMinRedundancy
	RankTol       float64 // relative rank tolerance; 0 means DefaultRankTol
	CacheSize     int     // masks kept; 0 means DefaultCacheSize
	// DropUnidentifiable, when true, estimates only a maximal identifiable
	// subset of the unknowns (in column order) when the available gauges do
	// not determine all of them; the others are reported as not estimable
	// (Result.Estimable) with theta 0. When false such an epoch is an
	// *UnidentifiableError.
	DropUnidentifiable bool
	// MemberNames (length G) and UnknownNames (length p) are used in error
	// messages; optional.
	MemberNames  []string
	UnknownNames []string
}

func (o Options) withDefaults() Options {
	if o.Alpha0 == 0 {
		o.Alpha0 = DefaultAlpha0
	}
	if o.Power == 0 {
		o.Power = DefaultPower
	}
	if o.AlphaGlobal == 0 {
		o.AlphaGlobal = DefaultAlphaGlobal
	}
	if o.MinRedundancy == 0 {
		o.MinRedundancy = DefaultMinRedundancy
	}
	if o.RankTol == 0 {
		o.RankTol = DefaultRankTol
	}
	if o.CacheSize == 0 {
		o.CacheSize = DefaultCacheSize
	}
	return o
}

// UnidentifiableError reports unknowns that the available gauges cannot
// determine (the whitened design restricted to them is rank deficient).
type UnidentifiableError struct {
	Unknowns []int    // column indices of A that depend on earlier columns
	Names    []string // their names, when Options.UnknownNames was given
	Gauges   int      // number of gauges available in the epoch
}

func (e *UnidentifiableError) Error() string {
	what := make([]string, len(e.Unknowns))
	for i, j := range e.Unknowns {
		if e.Names != nil {
			what[i] = e.Names[i]
		} else {
			what[i] = fmt.Sprintf("#%d", j)
		}
	}
	return fmt.Sprintf("reconcile: unknown load(s) %s cannot be estimated from the %d gauges available (their influence on those gauges is zero or a combination of the other unknowns); add gauges that see them, measure those loads, or set DropUnidentifiable",
		strings.Join(what, ", "), e.Gauges)
}

// Solver performs the per-epoch weighted least squares for one design.
// It is safe for concurrent use.
type Solver struct {
	g, p     int
	a        []float64 // G x p row-major copy of A
	sigma    []float64
	opt      Options
	k        float64 // critical value of the w-test
	delta0   float64
	rhoMax   float64 // RhoMax(alpha0, beta)
	chi      map[int]distuv.ChiSquared
	mu       sync.Mutex
	cache    map[string]*plan
	order    []string // cache keys, least recently used first
	last     *plan
	keyBuf   []byte
	allAvail []bool
}

// NewSolver prepares the least squares for design A (G x p: the influence
// of each unknown load shape on each gauged member's force, newtons per
// unit of the unknown) and the gauges' standard deviations sigma (G,
// newtons). A may have p = 0 columns (nothing to estimate), passed as nil.
func NewSolver(A *mat.Dense, sigma []float64, opt Options) (*Solver, error) {
	opt = opt.withDefaults()
	g := len(sigma)
	if g == 0 {
		return nil, errors.New("reconcile: no gauged members (sigma is empty); a fit needs at least one gauge")
	}
	p := 0
	if A != nil {
		var rows int
		rows, p = A.Dims()
		if rows != g {
			return nil, fmt.Errorf("reconcile: design A has %d rows but sigma has %d entries; both must have one per gauged member", rows, g)
		}
	}
	if opt.MemberNames != nil && len(opt.MemberNames) != g {
		return nil, fmt.Errorf("reconcile: %d member names for %d gauged members", len(opt.MemberNames), g)
	}
	if opt.UnknownNames != nil && len(opt.UnknownNames) != p {
		return nil, fmt.Errorf("reconcile: %d unknown names for %d columns of A", len(opt.UnknownNames), p)
	}
	for i, s := range sigma {
		if !(s > 0) || math.IsInf(s, 0) {
			return nil, fmt.Errorf("reconcile: standard deviation of %s is %v; it must be positive and finite (newtons)", memberName(opt, i), s)
		}
	}
	if opt.CacheSize < 1 {
		return nil, fmt.Errorf("reconcile: cache size %d; want at least 1", opt.CacheSize)
	}
	if !(opt.MinRedundancy > 0 && opt.MinRedundancy < 1) {
		return nil, fmt.Errorf("reconcile: MinRedundancy %v; want 0 < r < 1", opt.MinRedundancy)
	}
	if !(opt.AlphaGlobal > 0 && opt.AlphaGlobal < 1) {
		return nil, fmt.Errorf("reconcile: AlphaGlobal %v; want 0 < alpha < 1", opt.AlphaGlobal)
	}
	k, err := CriticalW(opt.Alpha0)
	if err != nil {
		return nil, err
	}
	d0, err := NonCentrality(opt.Alpha0, opt.Power)
	if err != nil {
		return nil, err
	}
	rm, err := RhoMax(opt.Alpha0, opt.Power)
	if err != nil {
		return nil, err
	}
	s := &Solver{g: g, p: p, sigma: append([]float64(nil), sigma...), opt: opt, k: k, delta0: d0, rhoMax: rm,
		chi: map[int]distuv.ChiSquared{}, cache: map[string]*plan{}, keyBuf: make([]byte, (g+7)/8),
		allAvail: make([]bool, g)}
	for i := range s.allAvail {
		s.allAvail[i] = true
	}
	s.a = make([]float64, g*p)
	for i := 0; i < g; i++ {
		for j := 0; j < p; j++ {
			v := A.At(i, j)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("reconcile: design A at %s, unknown %s is %v; influences must be finite", memberName(opt, i), unknownName(opt, j), v)
			}
			s.a[i*p+j] = v
		}
	}
	return s, nil
}

// Extend returns a solver for the design [A | cols]: the same gauges,
// noise and options with extra unknowns (one column of G entries each),
// for example hypotheses carried by an adapted fit. It reuses the critical
// values instead of recomputing them. Unknowns the available gauges cannot
// determine are dropped (DropUnidentifiable).
func (s *Solver) Extend(cols [][]float64) (*Solver, error) {
	p := s.p + len(cols)
	out := &Solver{g: s.g, p: p, sigma: s.sigma, opt: s.opt, k: s.k, delta0: s.delta0, rhoMax: s.rhoMax,
		chi: map[int]distuv.ChiSquared{}, cache: map[string]*plan{}, keyBuf: make([]byte, len(s.keyBuf)),
		allAvail: s.allAvail}
	out.opt.UnknownNames = nil
	out.opt.DropUnidentifiable = true
	out.a = make([]float64, s.g*p)
	for i := 0; i < s.g; i++ {
		copy(out.a[i*p:i*p+s.p], s.a[i*s.p:(i+1)*s.p])
		for j, c := range cols {
			if len(c) != s.g {
				return nil, fmt.Errorf("reconcile: extra column %d has %d entries; want %d (one per gauged member)", j, len(c), s.g)
			}
			if !isFinite(c[i]) {
				return nil, fmt.Errorf("reconcile: extra column %d at %s is %v; want finite", j, memberName(s.opt, i), c[i])
			}
			out.a[i*p+s.p+j] = c[i]
		}
	}
	return out, nil
}

// Gauges returns G, the number of gauged members.
func (s *Solver) Gauges() int { return s.g }

// Unknowns returns p, the number of unknown load magnitudes.
func (s *Solver) Unknowns() int { return s.p }

// Critical returns the critical value of the w-test (3.2905 at alpha0 = 0.001).
func (s *Solver) Critical() float64 { return s.k }

// RhoMax returns the correlation bound above which two candidates form one
// group (0.917 at alpha0 = 0.001, beta = 0.80; see RhoMax).
func (s *Solver) RhoMax() float64 { return s.rhoMax }

// Delta0 returns the non-centrality delta0 used for the MDB (4.1321 at
// alpha0 = 0.001, beta = 0.80).
func (s *Solver) Delta0() float64 { return s.delta0 }

func memberName(o Options, i int) string {
	if o.MemberNames != nil {
		return fmt.Sprintf("gauged member %s (#%d)", o.MemberNames[i], i)
	}
	return fmt.Sprintf("gauged member #%d", i)
}

func unknownName(o Options, j int) string {
	if o.UnknownNames != nil {
		return fmt.Sprintf("%s (#%d)", o.UnknownNames[j], j)
	}
	return fmt.Sprintf("#%d", j)
}

// Result is the outcome of one epoch. Slices indexed by gauged member have
// length G; entries of members that did not report (Available false) are 0.
// Redundancy, MDB, Checkable, ThetaStd and Estimable are shared between
// epochs with the same availability mask: read them, do not modify them.
type Result struct {
	Available  []bool    // which gauged members reported
	Residual   []float64 // r = y - y_hat, newtons
	Adjusted   []float64 // e = r - A theta, newtons
	W          []float64 // Baarda's w_i = e_i / sqrt((Q_e)_ii); 0 where r_i ~ 0
	Redundancy []float64 // r_i = (Q_e W)_ii, in [0, 1]
	MDB        []float64 // sigma_i delta0 / sqrt(r_i), newtons; 0 where r_i ~ 0
	Checkable  []bool    // available and r_i >= MinRedundancy: may alarm
	Theta      []float64 // estimated unknown magnitudes (p); 0 where not estimable
	ThetaStd   []float64 // their standard deviations sqrt((A^T W A)^-1)_jj
	Estimable  []bool    // unknowns estimated (false only with DropUnidentifiable)
	T          float64   // global test statistic e^T W e
	DOF        int       // degrees of freedom: available gauges - estimable unknowns
	PValue     float64   // P(chi-square(DOF) > T); 1 when DOF = 0
	Rejected   bool      // PValue < AlphaGlobal
	Critical   float64   // critical value of |w|
	// Largest is the checkable member with the largest |w| (-1 if none):
	// the one data snooping would suspect first.
	Largest int

	plan   *plan
	delta0 float64   // the solver's delta0 (minimal detectable sizes)
	rhoMax float64   // the solver's correlation bound (RhoMax)
	ew     []float64 // whitened adjusted residuals over all G (0 if unavailable)
}

// plan holds everything that depends only on the availability mask.
type plan struct {
	mask      []bool
	sigma     []float64 // G, the solver's (shared, read-only)
	idx       []int     // available members, length m
	est       []int     // estimable unknowns (columns of A), length pe
	estimable []bool
	q         []float64 // m x pe, orthonormal columns spanning W^1/2 A
	rinv      []float64 // pe x pe, R^-1 (upper triangular)
	redund    []float64 // G
	invSqrtR  []float64 // G: 1/sqrt(r_i), 0 where r_i ~ 0
	mdb       []float64 // G
	checkable []bool    // G
	thetaStd  []float64 // p
	dof       int
	chi       distuv.ChiSquared
	projs     projections // candidates' projected signatures (Identify)
}

// Epoch fits one epoch: y are the measured forces and yhat the model's
// predictions (both G, newtons), avail says which gauged members reported
// (nil: all). Entries of y and yhat for unavailable members are ignored.
func (s *Solver) Epoch(y, yhat []float64, avail []bool) (*Result, error) {
	res := &Result{}
	if err := s.EpochInto(res, y, yhat, avail); err != nil {
		return nil, err
	}
	return res, nil
}

// EpochInto is Epoch writing into dst, reusing its slices; with an
// unchanged mask it does not allocate.
func (s *Solver) EpochInto(dst *Result, y, yhat []float64, avail []bool) error {
	if len(y) != s.g || len(yhat) != s.g {
		return fmt.Errorf("reconcile: epoch has %d measured and %d predicted forces; want %d of each (one per gauged member)", len(y), len(yhat), s.g)
	}
	if avail == nil {
		avail = s.allAvail
	} else if len(avail) != s.g {
		return fmt.Errorf("reconcile: availability mask has %d entries; want %d (one per gauged member)", len(avail), s.g)
	}
	for i, ok := range avail {
		if ok && (!isFinite(y[i]) || !isFinite(yhat[i])) {
			return fmt.Errorf("reconcile: %s: measured %v, predicted %v; values must be finite (mark the member unavailable instead)", memberName(s.opt, i), y[i], yhat[i])
		}
	}
	s.mu.Lock()
	pl, err := s.planFor(avail)
	s.mu.Unlock()
	if err != nil {
		return err
	}
	s.apply(dst, pl, y, yhat)
	return nil
}

func isFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// planFor returns the cached plan for the mask, building it when needed.
// Called with s.mu held.
func (s *Solver) planFor(avail []bool) (*plan, error) {
	if s.last != nil && equalMask(s.last.mask, avail) {
		return s.last, nil
	}
	for i := range s.keyBuf {
		s.keyBuf[i] = 0
	}
	for i, ok := range avail {
		if ok {
			s.keyBuf[i/8] |= 1 << (i % 8)
		}
	}
	if pl, ok := s.cache[string(s.keyBuf)]; ok {
		s.touch(string(s.keyBuf))
		s.last = pl
		return pl, nil
	}
	pl, err := buildPlan(s.a, s.g, s.p, s.sigma, avail, s.opt, s.delta0)
	if err != nil {
		return nil, err
	}
	if c, ok := s.chi[pl.dof]; ok {
		pl.chi = c
	} else if pl.dof > 0 {
		pl.chi = distuv.ChiSquared{K: float64(pl.dof)}
		s.chi[pl.dof] = pl.chi
	}
	key := string(s.keyBuf)
	if len(s.order) >= s.opt.CacheSize {
		delete(s.cache, s.order[0])
		s.order = append(s.order[:0], s.order[1:]...)
	}
	s.cache[key] = pl
	s.order = append(s.order, key)
	s.last = pl
	return pl, nil
}

// touch moves key to the most recently used end of the order.
func (s *Solver) touch(key string) {
	for i, k := range s.order {
		if k == key {
			copy(s.order[i:], s.order[i+1:])
			s.order[len(s.order)-1] = k
			return
		}
	}
}

func equalMask(a, b []bool) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// buildPlan whitens the available rows of A, orthonormalises its columns
// (modified Gram-Schmidt, applied twice for orthogonality to working
// precision) dropping or rejecting dependent columns, and derives the
// quantities that are constant for this mask.
func buildPlan(a []float64, g, p int, sigma []float64, avail []bool, opt Options, delta0 float64) (*plan, error) {
	pl := &plan{mask: append([]bool(nil), avail...), sigma: sigma}
	for i, ok := range avail {
		if ok {
			pl.idx = append(pl.idx, i)
		}
	}
	m := len(pl.idx)
	if m == 0 {
		return nil, errors.New("reconcile: no gauged member reported in this epoch; nothing to fit")
	}
	// cols[j] is whitened column j over the available rows.
	basis := make([][]float64, 0, p)
	rcols := make([][]float64, 0, p) // R entries of accepted columns
	var dropped []int
	pl.estimable = make([]bool, p)
	for j := 0; j < p; j++ {
		v := make([]float64, m)
		norm0 := 0.0
		for k, i := range pl.idx {
			v[k] = a[i*p+j] / sigma[i]
			norm0 += v[k] * v[k]
		}
		norm0 = math.Sqrt(norm0)
		rc := make([]float64, len(basis)+1)
		for pass := 0; pass < 2; pass++ {
			for b, qb := range basis {
				d := dot(qb, v)
				rc[b] += d
				axpy(-d, qb, v)
			}
		}
		nv := math.Sqrt(dot(v, v))
		if norm0 == 0 || nv <= opt.RankTol*norm0 {
			dropped = append(dropped, j)
			continue
		}
		for k := range v {
			v[k] /= nv
		}
		rc[len(basis)] = nv
		basis = append(basis, v)
		rcols = append(rcols, rc)
		pl.est = append(pl.est, j)
		pl.estimable[j] = true
	}
	if len(dropped) > 0 && !opt.DropUnidentifiable {
		e := &UnidentifiableError{Unknowns: dropped, Gauges: m}
		if opt.UnknownNames != nil {
			for _, j := range dropped {
				e.Names = append(e.Names, opt.UnknownNames[j])
			}
		}
		return nil, e
	}
	pe := len(basis)
	pl.dof = m - pe
	pl.q = make([]float64, m*pe)
	for b, qb := range basis {
		for k := range qb {
			pl.q[k*pe+b] = qb[k]
		}
	}
	// R (pe x pe, upper triangular) from the Gram-Schmidt coefficients,
	// then R^-1 by back substitution, column by column.
	r := make([]float64, pe*pe)
	for c, rc := range rcols {
		for b, v := range rc {
			r[b*pe+c] = v
		}
	}
	pl.rinv = make([]float64, pe*pe)
	for c := 0; c < pe; c++ {
		for row := c; row >= 0; row-- {
			sum := 0.0
			if row == c {
				sum = 1
			}
			for k := row + 1; k <= c; k++ {
				sum -= r[row*pe+k] * pl.rinv[k*pe+c]
			}
			pl.rinv[row*pe+c] = sum / r[row*pe+row]
		}
	}
	// Standard deviations of theta: (A^T W A)^-1 = R^-1 R^-T, so the
	// variance of theta_j is the squared norm of row j of R^-1.
	pl.thetaStd = make([]float64, p)
	for b, j := range pl.est {
		s := 0.0
		for c := 0; c < pe; c++ {
			s += pl.rinv[b*pe+c] * pl.rinv[b*pe+c]
		}
		pl.thetaStd[j] = math.Sqrt(s)
	}
	pl.redund = make([]float64, g)
	pl.invSqrtR = make([]float64, g)
	pl.mdb = make([]float64, g)
	pl.checkable = make([]bool, g)
	for k, i := range pl.idx {
		ri := Redundancy(pl.q[k*pe : (k+1)*pe])
		pl.redund[i] = ri
		if ri > tinyRedundancy {
			pl.invSqrtR[i] = 1 / math.Sqrt(ri)
		}
		pl.mdb[i] = MinimalDetectableBias(sigma[i], delta0, ri)
		pl.checkable[i] = ri >= opt.MinRedundancy
	}
	return pl, nil
}

// Redundancy returns the redundancy number r_i = (Q_e W)_ii = 1 - h_i of an
// observation whose row of the orthonormal basis of W^1/2 A is qi (h_i the
// leverage, the diagonal of the hat matrix Q Q^T), clamped to [0, 1].
func Redundancy(qi []float64) float64 {
	h := dot(qi, qi)
	return math.Min(1, math.Max(0, 1-h))
}

// apply runs the per-epoch products for plan pl.
func (s *Solver) apply(dst *Result, pl *plan, y, yhat []float64) {
	g, p := s.g, s.p
	pe := len(pl.est)
	dst.Residual = resize(dst.Residual, g)
	dst.Adjusted = resize(dst.Adjusted, g)
	dst.W = resize(dst.W, g)
	dst.Theta = resize(dst.Theta, p)
	dst.ew = resize(dst.ew, g)
	dst.Available = pl.mask
	dst.Redundancy = pl.redund
	dst.MDB = pl.mdb
	dst.Checkable = pl.checkable
	dst.ThetaStd = pl.thetaStd
	dst.Estimable = pl.estimable
	dst.DOF = pl.dof
	dst.Critical = s.k
	dst.plan = pl
	dst.delta0 = s.delta0
	dst.rhoMax = s.rhoMax

	// Whitened residual rw_k = (y_i - yhat_i) / sigma_i, kept in dst.ew at
	// member index for now; qtr = Q^T rw.
	var qtrBuf [8]float64
	var qtr []float64
	if pe <= len(qtrBuf) {
		qtr = qtrBuf[:pe]
	} else {
		qtr = make([]float64, pe)
	}
	for i := range dst.ew {
		dst.ew[i] = 0
		dst.Residual[i] = 0
	}
	q := pl.q
	for k, i := range pl.idx {
		r := y[i] - yhat[i]
		dst.Residual[i] = r
		rw := r / s.sigma[i]
		dst.ew[i] = rw
		row := q[k*pe : k*pe+pe]
		for b, v := range row {
			qtr[b] += v * rw
		}
	}
	// Adjusted residuals ew = rw - Q (Q^T rw); T = |ew|^2.
	t := 0.0
	for k, i := range pl.idx {
		row := q[k*pe : k*pe+pe]
		proj := 0.0
		for b, v := range row {
			proj += v * qtr[b]
		}
		ew := dst.ew[i] - proj
		dst.ew[i] = ew
		t += ew * ew
	}
	for i := 0; i < g; i++ {
		ew := dst.ew[i]
		dst.Adjusted[i] = ew * s.sigma[i]
		dst.W[i] = ew * pl.invSqrtR[i]
	}
	// theta = R^-1 Q^T rw.
	for j := range dst.Theta {
		dst.Theta[j] = 0
	}
	for b, j := range pl.est {
		v := 0.0
		for c := b; c < pe; c++ {
			v += pl.rinv[b*pe+c] * qtr[c]
		}
		dst.Theta[j] = v
	}
	dst.T = t
	dst.PValue = 1
	if pl.dof > 0 {
		dst.PValue = pl.chi.Survival(t)
	}
	dst.Rejected = dst.PValue < s.opt.AlphaGlobal
	dst.Largest = -1
	best := -1.0
	for i, ok := range pl.checkable {
		if ok && math.Abs(dst.W[i]) > best {
			best = math.Abs(dst.W[i])
			dst.Largest = i
		}
	}
}

func resize(s []float64, n int) []float64 {
	if cap(s) >= n {
		return s[:n]
	}
	return make([]float64, n)
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

func axpy(alpha float64, x, y []float64) {
	for i, v := range x {
		y[i] += alpha * v
	}
}
