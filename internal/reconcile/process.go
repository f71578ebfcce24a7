package reconcile

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

// Outcomes of an epoch (the `outcome` label of shm_epochs_total).
const (
	OutcomeAccepted = "accepted" // fitted, global test passed
	OutcomeRejected = "rejected" // fitted, global test rejected
	OutcomeSkipped  = "skipped"  // not fitted: a load or temperature input missing, or no gauge
	OutcomeFailed   = "failed"   // fit impossible (unknowns not identifiable with the gauges present)
)

// MemberResult is one gauged member in one epoch.
type MemberResult struct {
	Member string
	// Available is true when every gauge of the member reported (a member
	// with a missing face gauge is not used: its mean strain would carry
	// bending).
	Available bool
	// MeasuredN is E A times the mean compensated gauge strain, the change
	// since the zero reading, in newtons.
	MeasuredN float64
	// PredictedN is the model's prediction of the same change from the
	// recorded loads and temperatures (unknown loads not included).
	PredictedN float64
	// ResidualN = MeasuredN - PredictedN; AdjustedN is the residual after
	// the unknown loads are fitted.
	ResidualN, AdjustedN float64
	// SigmaN is the measurement standard deviation; SigmaAdjustedN the
	// standard deviation of the adjusted residual, sqrt((Q_e)_ii).
	SigmaN, SigmaAdjustedN float64
	// FittedN = PredictedN + the unknown loads' share: the model's best
	// estimate of the member force change.
	FittedN float64
	// W is Baarda's w; while the fit carries adapted hypotheses it comes
	// from the adapted fit (except for the alarm's own member), and
	// WNominal keeps that of the nominal fit.
	W, WNominal float64
	Redundancy  float64
	MDBN        float64
	Checkable   bool
}

// LoadEstimate is the estimated factor of one unknown load pattern.
type LoadEstimate struct {
	Pattern   string
	Value     float64
	Std       float64
	Estimable bool
}

// RankedCause is one ranked candidate cause of a rejected fit, in the
// units it is shown in: the one vocabulary of causes of the epoch
// results, the alarm events' evidence, the dashboard, the API and the
// replay report.
type RankedCause struct {
	Kind Kind `json:"kind"`
	// Subject is what the cause is about: a member, a gauge channel, a
	// support or node direction ("L8 y"), a support spring.
	Subject string `json:"subject"`
	// Label names the candidate ("gauge D2", "E A of D2"); unique among
	// the candidates of a structure.
	Label     string  `json:"label"`
	T         float64 `json:"t"` // test statistic, chi-square(1) without the cause
	PValue    float64 `json:"p_value,omitempty"`
	Size      float64 `json:"size"` // in Unit
	Unit      string  `json:"unit"` // N, %, mm, µε (Kind.Display)
	Separable bool    `json:"separable,omitempty"`
	Epochs    int     `json:"epochs,omitempty"`
	// Std is the standard deviation of Size and MDS the minimal detectable
	// size (for a stiffness change, a loss), both in Unit.
	Std float64 `json:"std,omitempty"`
	MDS float64 `json:"mds,omitempty"`
	// Implausible marks a size outside the candidate's plausible range
	// (PlausibleRange); such groups are listed last.
	Implausible bool `json:"implausible,omitempty"`
	// Strain and StrainStd give a gauge fault as a mean strain of the
	// member's gauges, in microstrain (0 for other kinds).
	Strain    float64 `json:"strain_microstrain,omitempty"`
	StrainStd float64 `json:"strain_std_microstrain,omitempty"`
	// Group numbers the separability groups from 1 in rank order; causes
	// with the same Group cannot be told apart by these gauges and are
	// listed in no particular order (by kind and label). GroupSize is the
	// number of causes in the group.
	Group     int `json:"group,omitempty"`
	GroupSize int `json:"group_size,omitempty"`
}

// EpochResult is everything computed for one epoch.
type EpochResult struct {
	Structure string
	Time      time.Time
	Outcome   string
	// Reason explains a skipped or failed epoch.
	Reason  string
	Members []MemberResult
	// State is the total state of every member of the structure, in
	// structure order (fitted epochs only; see MemberState).
	State     []MemberState
	ChiSquare float64
	DOF       int
	PValue    float64
	Rejected  bool
	Critical  float64
	Loads     []LoadEstimate
	// Causes are this epoch's ranked causes (rejected fits only); the
	// sliding-window ranking is Processor.WindowCauses.
	Causes []RankedCause
	// Adapted is the fit with the hypotheses carried while alarms are
	// active (nil when none is carried); Members' w, Loads and Causes then
	// come from it, ChiSquare and PValue stay those of the nominal model.
	Adapted *AdaptedFit
	// MissingChannels are the channels that did not report in the epoch.
	MissingChannels []string
}

// ProcessorOptions configure a Processor.
type ProcessorOptions struct {
	// Reconcile are the statistical options (test sizes, thresholds).
	Reconcile Options
	// EstimateMissingLoads turns a measured pattern whose load channel is
	// missing into an unknown to estimate; otherwise the epoch is skipped.
	EstimateMissingLoads bool
	// CauseWindow is the number of epochs of the sliding-window ranking
	// (default 60).
	CauseWindow int
	// MaxCauses caps the ranked lists kept per epoch (default 10 groups).
	MaxCauses int
	// CauseSpan is the span of epochs whose cause statistics are summed
	// for the causes of a rejected epoch: the for-duration the statistical
	// alarms decide on (the pipeline passes alerts.DivergingFor). Required.
	CauseSpan time.Duration
}

// Processor reconciles one structure's epochs: snapshot in, EpochResult out.
// Everything that does not change between epochs is computed at
// construction (influence matrices, signatures) or cached per set of
// available members (inside the Solver).
type Processor struct {
	structure string
	lm        *linearModel
	state     *stateModel
	sm        *sensors.Map
	opt       ProcessorOptions
	sigma     []float64
	solvers   map[string]*Solver // by the sorted list of missing measured patterns
	window    *WindowRanker
	cands     *candidates
	lastID    *Identification // the latest epoch's, for grouping the window
	adapted   []adaptedHypothesis
	adaptedN  int // epochs since the first hypothesis was carried
	recent    *RecentRanker
	faults    map[string]*FaultRanker // by active alarm (faults.go)
	loadHist  loadHistory
	fixed     []Candidate       // gauge, channel, settlement and nodal-load candidates
	subjects  map[string]string // candidate label -> subject
	kinds     map[string]string
	y, yhat   []float64
	avail     []bool
	rowSigma  []float64 // gauge sigmas, then the input noises
	rowNames  []string
}

// NewProcessor builds the reconciliation of model m with sensor map sm.
func NewProcessor(m *model.Model, sm *sensors.Map, opt ProcessorOptions) (*Processor, error) {
	if opt.CauseWindow <= 0 {
		opt.CauseWindow = 60
	}
	if opt.MaxCauses <= 0 {
		opt.MaxCauses = 10
	}
	if opt.CauseSpan <= 0 {
		return nil, fmt.Errorf("structure %s: cause span %v; want the for-duration of the statistical alarms (positive)", m.Structure().Name, opt.CauseSpan)
	}
	lm, err := newLinearModel(m, sm)
	if err != nil {
		return nil, err
	}
	p := &Processor{
		loadHist:  loadHistory{n: opt.CauseWindow},
		structure: m.Structure().Name,
		lm:        lm,
		sm:        sm,
		opt:       opt,
		solvers:   map[string]*Solver{},
		subjects:  map[string]string{},
		kinds:     map[string]string{},
	}
	if p.state, err = newStateModel(lm, sm); err != nil {
		return nil, err
	}
	if p.sigma, err = fullSetSigma(sm, lm.names); err != nil {
		return nil, err
	}
	p.rowSigma = append([]float64(nil), p.sigma...)
	p.rowNames = append([]string(nil), lm.names...)
	for _, in := range lm.inputs {
		p.rowSigma = append(p.rowSigma, in.Sigma)
		p.rowNames = append(p.rowNames, in.Label)
	}
	if _, err := p.solverFor(nil); err != nil {
		return nil, err
	}
	if p.window, err = NewWindowRanker(opt.CauseWindow); err != nil {
		return nil, err
	}
	if p.recent, err = NewRecentRanker(opt.CauseSpan); err != nil {
		return nil, err
	}
	rows := len(p.rowSigma)
	if p.cands, err = newCandidates(lm); err != nil {
		return nil, err
	}
	p.fixed, p.subjects = p.cands.fixedCandidates(lm, sm, rows)
	p.y, p.yhat, p.avail = make([]float64, rows), make([]float64, rows), make([]bool, rows)
	for i := len(lm.gauged); i < rows; i++ {
		p.avail[i] = true // pseudo-observations of the inputs: always there, value 0
	}
	return p, nil
}

// fullSetSigma returns each gauged member's force standard deviation with
// all its gauges reporting, from the sensor map's noise figures (the
// weights of the least-squares fit).
func fullSetSigma(sm *sensors.Map, names []string) ([]float64, error) {
	values := map[string]float64{}
	for _, ch := range sm.Channels() {
		values[ch.ID] = 0
		if ch.Kind == sensors.KindTemperature {
			values[ch.ID] = 15
		}
	}
	snap := sm.Evaluate(values)
	byName := map[string]float64{}
	for _, mm := range snap.Members {
		byName[mm.Member] = mm.SigmaN
	}
	out := make([]float64, len(names))
	for i, n := range names {
		s := byName[n]
		if !(s > 0) || math.IsInf(s, 0) {
			return nil, fmt.Errorf("sensor map %s: member %s: gauge noise gives force standard deviation %g N; give every gauge a positive noise figure", sm.File(), n, s)
		}
		out[i] = s
	}
	return out, nil
}

// pad extends a signature over the gauged members with zeros for the
// input pseudo-observation rows.
func pad(v []float64, n int) []float64 {
	if len(v) >= n {
		return v
	}
	return append(append(make([]float64, 0, n), v...), make([]float64, n-len(v))...)
}

func column(a *mat.Dense, j int) []float64 {
	r, _ := a.Dims()
	out := make([]float64, r)
	for i := range out {
		out[i] = a.At(i, j)
	}
	return out
}

// WindowCauses returns the sliding-window ranking of the causes over the
// last CauseWindow epochs (computed on demand: it costs more than an epoch).
func (p *Processor) WindowCauses() []RankedCause {
	if p.lastID == nil {
		return nil
	}
	return convertGroups(p.lastID.Groups(p.window.Ranked()), p.subjects, p.opt.MaxCauses)
}

// Gauged returns the gauged member ids in row order.
func (p *Processor) Gauged() []string { return append([]string(nil), p.lm.names...) }

// Unknown returns the unknown load patterns in estimate order.
func (p *Processor) Unknown() []string { return append([]string(nil), p.lm.unknown...) }

// Sigma returns the gauged members' force standard deviations (N).
func (p *Processor) Sigma() []float64 { return append([]float64(nil), p.sigma...) }

// Critical returns the critical value of |w|.
func (p *Processor) Critical() float64 {
	s, _ := p.solverFor(nil)
	return s.Critical()
}

// solverFor returns the solver whose unknowns are the structure's unknown
// patterns plus the given missing measured patterns.
func (p *Processor) solverFor(missing []string) (*Solver, error) {
	key := strings.Join(missing, "\x00")
	if s, ok := p.solvers[key]; ok {
		return s, nil
	}
	lm := p.lm
	a, names, err := lm.design(missing)
	if err != nil {
		return nil, err
	}
	cols := len(lm.unknown) + len(missing)
	opt := p.opt.Reconcile
	opt.UnknownNames = names
	opt.MemberNames = p.rowNames
	if cols+len(lm.inputs) == 0 {
		opt.DropUnidentifiable = true
	}
	s, err := NewSolver(a, p.rowSigma, opt)
	if err != nil {
		return nil, fmt.Errorf("structure %s: reconciliation: %w", p.structure, err)
	}
	if len(p.solvers) < 64 {
		p.solvers[key] = s
	}
	return s, nil
}

func indexOf(list []string, s string) int {
	for i, v := range list {
		if v == s {
			return i
		}
	}
	return -1
}

// Process reconciles one epoch's snapshot taken at time t.
func (p *Processor) Process(t time.Time, snap *sensors.Snapshot, missingChannels []string) *EpochResult {
	lm := p.lm
	res := &EpochResult{Structure: p.structure, Time: t, MissingChannels: missingChannels}
	res.Members = make([]MemberResult, len(lm.names))
	byName := make(map[string]*sensors.MemberMeasurement, len(snap.Members))
	for i := range snap.Members {
		byName[snap.Members[i].Member] = &snap.Members[i]
	}
	if len(snap.MissingTemperatures) > 0 {
		res.Outcome, res.Reason = OutcomeSkipped, "temperature missing for group(s) "+strings.Join(snap.MissingTemperatures, ", ")
	}
	var missing []string
	if len(snap.MissingLoads) > 0 {
		if p.opt.EstimateMissingLoads {
			missing = snap.MissingLoads
		} else if res.Outcome == "" {
			res.Outcome, res.Reason = OutcomeSkipped, "load channel missing for pattern(s) "+strings.Join(snap.MissingLoads, ", ")
		}
	}
	nAvail := 0
	for g, name := range lm.names {
		mr := &res.Members[g]
		mr.Member = name
		mr.SigmaN = p.sigma[g]
		mm := byName[name]
		p.avail[g] = mm != nil && mm.Gauges > 0 && mm.Gauges == mm.Expected
		mr.Available = p.avail[g]
		if mm == nil {
			continue
		}
		mr.MeasuredN = mm.ForceN
		mr.PredictedN = lm.predict(g, snap.Loads, snap.Temperatures, mm.ZeroLoads, mm.ZeroTemperatures)
		mr.ResidualN = mr.MeasuredN - mr.PredictedN
		p.y[g], p.yhat[g] = mr.MeasuredN, mr.PredictedN
		if p.avail[g] {
			nAvail++
		}
	}
	if res.Outcome == "" && nAvail == 0 {
		res.Outcome, res.Reason = OutcomeSkipped, "no gauged member reported all its gauges"
	}
	if res.Outcome != "" {
		return res
	}
	s, err := p.solverFor(missing)
	if err == nil {
		var r *Result
		r, err = s.Epoch(p.y, p.yhat, p.avail)
		if err == nil {
			p.fill(res, r, s, missing, snap)
			return res
		}
	}
	res.Outcome = OutcomeFailed
	res.Reason = err.Error()
	var ue *UnidentifiableError
	if errors.As(err, &ue) {
		res.Reason = "unknown loads not identifiable with the gauges present: " + err.Error()
	}
	return res
}

// fitMember sets gauged member g's statistics from the fit r: the
// adjusted residual, Baarda's w, redundancy, MDB, the fitted force
// (measured less the adjusted residual) and the adjusted residual's
// standard deviation sigma_g sqrt(r_g).
func (p *Processor) fitMember(mr *MemberResult, r *Result, g int) {
	mr.AdjustedN = r.Adjusted[g]
	mr.W = r.W[g]
	mr.Redundancy = r.Redundancy[g]
	mr.MDBN = r.MDB[g]
	mr.Checkable = r.Checkable[g]
	if mr.Available {
		mr.FittedN = mr.MeasuredN - mr.AdjustedN
		mr.SigmaAdjustedN = 0
		if mr.Redundancy > 0 {
			mr.SigmaAdjustedN = p.sigma[g] * math.Sqrt(mr.Redundancy)
		}
	}
}

// loadEstimates appends to dst the fit's estimates of the unknown load
// patterns and of the missing inputs estimated in their place, in the
// solver's column order.
func (p *Processor) loadEstimates(dst []LoadEstimate, r *Result, missing []string) []LoadEstimate {
	names := append(append([]string(nil), p.lm.unknown...), missing...)
	for j, n := range names {
		if j >= len(r.Theta) {
			break
		}
		dst = append(dst, LoadEstimate{Pattern: n, Value: r.Theta[j], Std: r.ThetaStd[j], Estimable: r.Estimable[j]})
	}
	return dst
}

// fill copies the fit into res and ranks causes when the fit is rejected.
func (p *Processor) fill(res *EpochResult, r *Result, s *Solver, missing []string, snap *sensors.Snapshot) {
	lm := p.lm
	res.ChiSquare, res.DOF, res.PValue, res.Rejected, res.Critical = r.T, r.DOF, r.PValue, r.Rejected, r.Critical
	res.Outcome = OutcomeAccepted
	if r.Rejected {
		res.Outcome = OutcomeRejected
	}
	for g := range res.Members {
		p.fitMember(&res.Members[g], r, g)
	}
	res.Loads = p.loadEstimates(res.Loads[:0], r, missing)
	theta := r.Theta
	if len(theta) > len(lm.unknown) {
		theta = theta[:len(lm.unknown)]
	}
	// Cause ranking, every epoch so that the sliding window sums honest
	// statistics: the fixed candidates plus the stiffness signatures at the
	// current force state. The per-epoch list is reported for rejected
	// fits only.
	loads := snap.Loads
	if len(missing) > 0 {
		loads = make(map[string]float64, len(snap.Loads)+len(missing))
		for k, v := range snap.Loads {
			loads[k] = v
		}
		for j, n := range missing {
			loads[n] = r.Theta[len(lm.unknown)+j]
		}
	}
	state := lm.stateForces(loads, snap.Temperatures, theta)
	res.State = p.memberStates(res, state, r, missing, snap)
	cands := append(append([]Candidate(nil), p.fixed...),
		p.cands.stateCandidates(lm, state, loads, snap.Temperatures, theta, p.sigma, len(p.rowSigma))...)
	id, err := r.Identify(cands, 0)
	if err != nil {
		res.Reason = "cause ranking: " + err.Error()
		return
	}
	p.lastID = id
	p.window.Add(id.Causes)
	p.recent.Add(res.Time, id.Causes)
	for _, f := range p.faults {
		f.Add(res.Time, id.Causes)
	}
	if r.Rejected {
		// The causes summed over the epochs of the last CauseSpan (the
		// epochs an alarm's decision rests on), grouped by this epoch's
		// separability.
		res.Causes = convertGroups(id.Groups(p.recent.Causes()), p.subjects, p.opt.MaxCauses)
	}
	if len(p.adapted) > 0 {
		p.reidentify()
		p.adaptedFit(res, s, cands, missing)
	} else if r.Rejected {
		if hyps := p.identifiedGroup(res, r.Critical); len(hyps) > 0 {
			p.adaptedFitWith(res, s, cands, missing, hyps, false)
		}
	}
	if !r.Rejected && res.Adapted == nil {
		p.loadHist.add(theta)
	}
}

// LoadShifts returns the unknown-load estimates of res that left the
// distribution of the recent accepted epochs by more than the local
// test's critical value res.Critical (Baarda's k of the configured
// alpha0) in combined standard deviations (to be called when an alarm
// rises).
func (p *Processor) LoadShifts(res *EpochResult) []LoadShift {
	if res.Critical <= 0 { // not fitted
		return nil
	}
	theta := make([]float64, 0, len(p.lm.unknown))
	std := make([]float64, 0, len(p.lm.unknown))
	for j := range p.lm.unknown {
		if j >= len(res.Loads) {
			return nil
		}
		theta = append(theta, res.Loads[j].Value)
		std = append(std, res.Loads[j].Std)
	}
	return p.loadHist.shifts(p.lm.unknown, theta, std, res.Critical)
}

// minStiffnessEffect is the least effect, in standard deviations of the
// most affected gauge, that a total loss of a member's stiffness (s = -1)
// must have for the member to be a candidate cause. Members carrying
// (almost) no force at the current state, such as the zero-force members of
// a truss, have signatures of rounding noise whose direction is arbitrary;
// ranking them would report absurd sizes (common practice: a hypothesis
// whose effect is far below the noise is not testable).
const minStiffnessEffect = 1e-3

// detectable reports whether a stiffness signature moves some gauge by at
// least minStiffnessEffect standard deviations per unit relative change.
func detectable(sig, sigma []float64) bool {
	for g, v := range sig {
		if math.Abs(v) >= minStiffnessEffect*sigma[g] {
			return true
		}
	}
	return false
}
