// Package simulate is the logger simulator for the example structures: a
// deterministic, seeded generator of the raw readings a site logger would
// send for a truss under pedestrians (or maintenance crews), snow, a daily
// temperature cycle and a slowly varying unmeasured load, with gauge noise at
// each channel's declared standard deviation, occasional bad messages and an
// injected fault (gauge drift, a stuck gauge, a stiffness loss of a member,
// a support settlement).
//
// By default a reading is the full float64 of the noisy value; with
// Options.Quantise the logger reports it at its unit's fixed resolution
// (LoggerResolution), as a real logger does.
//
// The generator is pure computation: it yields one Step per time stamp with
// the readings (channel, raw value, unit) and the truth behind them, and
// does no I/O. Package publish sends the steps to an MQTT broker and package
// loggercsv writes them as a logger CSV file.
//
// Mechanics: the true member forces of each structure state (intact, and
// after each structural fault) come from one analysis per state by the
// direct stiffness method (package model) and its influence matrix,
// N = H f, over every load pattern and every measured temperature group;
// a stiffness loss is a new state with the member's E scaled by (1 - loss).
// A gauge on member m then sees the mechanical strain
// e = N/(E'A) - N0/(E A) relative to its zero state N0 (E'A the member's
// current stiffness), plus a bending strain of opposite sign on opposite
// faces that the mean cancels, the noise, and its thermal output at the
// true temperature; the sensor map's inverse calibration turns that into
// the raw reading.
package simulate

import (
	"errors"
	"fmt"
	"iter"
	"math"
	"math/rand/v2"
	"sort"
	"strings"
	"time"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

// Options configures a scenario. Start from DefaultOptions and change what
// you need.
type Options struct {
	// Seed makes the scenario reproducible: the same seed, options,
	// structure and sensor map give identical steps.
	Seed uint64
	// Start is the time stamp of the first step.
	Start time.Time
	// Duration is the simulated span; steps run from Start to before
	// Start+Duration.
	Duration time.Duration
	// Rate is the interval between steps (one reading per channel each).
	Rate time.Duration
	// Faults are injected at their times.
	Faults []Fault
	// BadRate is the probability per channel and step that the logger sends
	// a bad message (malformed, NaN, unknown channel, wrong unit) for it.
	BadRate float64
	// Traffic is the pedestrian model for deck panel patterns (measured
	// patterns of point loads on two nodes, such as the footbridge's
	// panel_1..panel_8).
	Traffic Traffic
	// Crews is the model of people counted by a "count" load channel (the
	// roof's maintenance walkway).
	Crews Crews
	// Weather drives the temperature channels and the thermal loads.
	Weather Weather
	// Exposure overrides the exposure of temperature channels by id; by
	// default a channel is Sunlit when its id or one of its groups contains
	// "top", else Shaded.
	Exposure map[string]Exposure
	// Slow overrides the slow process of a pattern by name. By default an
	// unknown pattern (crowd, snow drift) gets UnknownLoad and a measured
	// pattern that is neither a deck panel nor counted gets MeasuredLoad.
	Slow map[string]SlowLoad
	// UnknownLoad is the default slow process of unmeasured patterns.
	UnknownLoad SlowLoad
	// MeasuredLoad is the default slow process of other measured patterns
	// (the roof's snow).
	MeasuredLoad SlowLoad
	// BendingRatio is the bending strain on a member's gauges as a fraction
	// of its axial strain change, with alternating sign on the gauges of
	// the member (cancelled by the mean when all report).
	BendingRatio float64
	// Quantise makes the logger report every raw reading at the fixed
	// resolution of its unit (LoggerResolution), as a real logger does,
	// instead of the full float64 of the noisy value. Off by default: the
	// recorded day (testdata/replay) and the tests' golden files were made
	// without it.
	Quantise bool
}

// SlowLoad is a slowly varying pattern factor: an Ornstein-Uhlenbeck process
// with this mean, standard deviation and correlation time, cut at zero
// (loads do not pull up).
type SlowLoad struct {
	Mean, SD float64
	Tau      time.Duration
}

// Crews are people counted on a walkway: visits arrive as a Poisson process
// in working hours and stay for a while with a few people each.
type Crews struct {
	// VisitsPerDay is the mean number of visits per day.
	VisitsPerDay float64
	// MeanStay is the mean length of a visit (exponentially distributed).
	MeanStay time.Duration
	// MaxPeople is the largest crew; crews have 1..MaxPeople people.
	MaxPeople int
}

// DefaultOptions returns the options of a typical day: 1 s rate, 24 h from
// 2026-06-01T00:00:00Z, default traffic and weather, no faults, bad-message
// rate 0.001.
func DefaultOptions() Options {
	return Options{
		Seed:         1,
		Start:        time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC),
		Duration:     24 * time.Hour,
		Rate:         time.Second,
		BadRate:      0.001,
		Traffic:      DefaultTraffic(),
		Crews:        Crews{VisitsPerDay: 3, MeanStay: 40 * time.Minute, MaxPeople: 3},
		Weather:      DefaultWeather(),
		UnknownLoad:  SlowLoad{Mean: 0.02, SD: 0.01, Tau: 2 * time.Hour},
		MeasuredLoad: SlowLoad{Mean: 0.3, SD: 0.1, Tau: 6 * time.Hour},
		BendingRatio: 0.1,
	}
}

// patternDriver says what sets a pattern's factor.
type patternDriver int

const (
	driveNone      patternDriver = iota // zero except for faults
	drivePermanent                      // constant (dead load)
	driveDeck                           // pedestrians on a deck panel
	driveCount                          // people counted by a count channel
	driveSlow                           // slow process
)

// state is one structure state: its influence matrix over the inputs and
// its members' axial stiffness E*A.
type state struct {
	h  *mat.Dense // members x inputs
	ea []float64
}

// channelInfo is a channel with what the generator needs of it.
type channelInfo struct {
	ch       sensors.Channel
	member   int       // gauges: member index
	zeroN    float64   // gauges: force in the zero state (intact), N
	bendSign float64   // gauges: +1, -1 or 0
	tempCh   int       // gauges: index of the compensating temperature channel, or -1
	pattern  int       // load channels: pattern index
	exposure Exposure  // temperature channels
	drift    []Fault   // drift faults on this channel
	stuckAt  time.Time // zero when never stuck
	decimals int       // Options.Quantise: decimals of the channel's unit
}

// deckPanel is a deck panel pattern and its span along the deck axis.
type deckPanel struct {
	pattern int
	lo, hi  float64
	weight  float64 // N per unit pattern factor along gravity
}

// Generator yields the steps of one scenario. Build it with New; a
// Generator is not safe for concurrent use, and All restarts the scenario
// from the beginning each time it is ranged over.
type Generator struct {
	st       *model.Structure // with any added settlement patterns
	sm       *sensors.Map
	opt      Options
	inputs   []model.Input
	nPat     int      // inputs[:nPat] are the patterns, in structure order
	groups   []string // inputs[nPat:] are temperature groups
	groupRef []float64
	groupCh  []int // temperature channel feeding each group
	drivers  []patternDriver
	states   []state
	faultAt  []time.Time // activation time of states[k+1]
	chans    []channelInfo
	panels   []deckPanel
	deckLo   float64
	deckHi   float64
	deckAxis int
	settle   map[int]float64 // pattern index -> factor per metre of settlement
	// settleNode maps a settling node id to its settlement pattern.
	settleNode map[string]int
	slow       map[int]SlowLoad
	count      map[int]float64 // pattern index -> factor per person
	// permanent holds the permanent load factors by pattern index.
	permanent []float64
	// loadChannels counts the load channels feeding each pattern; a
	// pattern's factor is shared equally among them.
	loadChannels map[int]int
}

// New prepares a scenario for structure st with sensor map sm: it analyses
// the intact structure and one state per structural fault.
func New(st *model.Structure, sm *sensors.Map, opt Options) (*Generator, error) {
	if st == nil || sm == nil {
		return nil, errors.New("simulate: need a structure and a sensor map")
	}
	if opt.Rate <= 0 {
		return nil, fmt.Errorf("simulate: rate %s must be positive", opt.Rate)
	}
	if opt.Duration <= 0 {
		return nil, fmt.Errorf("simulate: duration %s must be positive", opt.Duration)
	}
	if opt.BadRate < 0 || opt.BadRate > 1 || math.IsNaN(opt.BadRate) {
		return nil, fmt.Errorf("simulate: bad-message rate %g must be between 0 and 1", opt.BadRate)
	}
	if opt.Start.IsZero() {
		return nil, errors.New("simulate: no start time")
	}
	if tr := opt.Traffic; tr.PeakRate > 0 && !(tr.MeanSpeed > 0 && tr.MeanMass > 0) {
		return nil, fmt.Errorf("simulate: pedestrian traffic needs a positive mean speed and mass (got %g m/s, %g kg); start from DefaultOptions", tr.MeanSpeed, tr.MeanMass)
	}
	g := &Generator{sm: sm, opt: opt, settle: map[int]float64{}, settleNode: map[string]int{}, slow: map[int]SlowLoad{}, count: map[int]float64{}}
	g.st = copyStructure(st)
	if err := g.prepareChannels(); err != nil {
		return nil, err
	}
	if err := g.prepareFaults(); err != nil {
		return nil, err
	}
	g.preparePatterns()
	if err := g.analyse(); err != nil {
		return nil, err
	}
	if err := g.prepareDeck(); err != nil {
		return nil, err
	}
	return g, nil
}

// copyStructure copies what a fault may change (members, patterns).
func copyStructure(s *model.Structure) *model.Structure {
	c := *s
	c.Members = append([]model.Member(nil), s.Members...)
	c.Patterns = append([]model.Pattern(nil), s.Patterns...)
	c.Supports = append([]model.Support(nil), s.Supports...)
	return &c
}

// Structure returns the structure the generator works on (with a pattern
// added for each settlement fault at a node that had none). Do not modify it.
func (g *Generator) Structure() *model.Structure { return g.st }

// Channels returns the sensor map's channels in the order of Step.Readings
// and Truth.Engineering.
func (g *Generator) Channels() []sensors.Channel {
	out := make([]sensors.Channel, len(g.chans))
	for i, c := range g.chans {
		out[i] = c.ch
	}
	return out
}

// Steps returns the number of steps of the scenario.
func (g *Generator) Steps() int {
	return int((g.opt.Duration + g.opt.Rate - 1) / g.opt.Rate)
}

func (g *Generator) prepareChannels() error {
	chans := g.sm.Channels()
	index := map[string]int{}
	for i, ch := range chans {
		index[ch.ID] = i
	}
	perMember := map[string]int{}
	g.chans = make([]channelInfo, len(chans))
	for i, ch := range chans {
		ci := channelInfo{ch: ch, member: -1, tempCh: -1, pattern: -1}
		if g.opt.Quantise {
			d, err := resolutionOf(ch.ID, ch.Unit)
			if err != nil {
				return err
			}
			ci.decimals = d
		}
		switch {
		case ch.Kind.IsGauge():
			m, ok := g.st.MemberIndex(ch.Member)
			if !ok {
				return fmt.Errorf("simulate: channel %q: member %q is not in structure %q", ch.ID, ch.Member, g.st.Name)
			}
			ci.member = m
			k := perMember[ch.Member]
			perMember[ch.Member]++
			ci.bendSign = 1 - 2*float64(k%2)
			if ch.TemperatureChannel != "" {
				t, ok := index[ch.TemperatureChannel]
				if !ok {
					return fmt.Errorf("simulate: channel %q: temperature channel %q is not in the sensor map", ch.ID, ch.TemperatureChannel)
				}
				ci.tempCh = t
			}
		case ch.Kind == sensors.KindLoad:
			p, ok := g.st.PatternIndex(ch.Pattern)
			if !ok {
				return fmt.Errorf("simulate: channel %q: pattern %q is not in structure %q", ch.ID, ch.Pattern, g.st.Name)
			}
			ci.pattern = p
		case ch.Kind == sensors.KindTemperature:
			ci.exposure = Shaded
			if strings.Contains(ch.ID, "top") {
				ci.exposure = Sunlit
			}
			for _, gr := range ch.Groups {
				if strings.Contains(gr, "top") {
					ci.exposure = Sunlit
				}
			}
			if e, ok := g.opt.Exposure[ch.ID]; ok {
				ci.exposure = e
			}
		}
		g.chans[i] = ci
	}
	// An odd gauge out on a member gets no bending, so the member's mean
	// still cancels it.
	seen := map[string]int{}
	for i := range g.chans {
		c := &g.chans[i]
		if c.member < 0 {
			continue
		}
		seen[c.ch.Member]++
		if n := perMember[c.ch.Member]; n%2 == 1 && seen[c.ch.Member] == n {
			c.bendSign = 0
		}
	}
	// Temperature groups: the channels that feed them, the zero-state
	// temperatures.
	fed := map[string]int{}
	for i, c := range g.chans {
		if c.ch.Kind != sensors.KindTemperature {
			continue
		}
		for _, gr := range c.ch.Groups {
			if _, dup := fed[gr]; !dup {
				fed[gr] = i
				g.groups = append(g.groups, gr)
			}
		}
	}
	sort.Strings(g.groups)
	zs := g.sm.ZeroStates()
	ids := make([]string, 0, len(zs))
	for id := range zs {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	for _, gr := range g.groups {
		g.groupCh = append(g.groupCh, fed[gr])
		ref, found := 0.0, false
		for _, id := range ids {
			if t, ok := zs[id].Temperatures[gr]; ok {
				ref, found = t, true
				break
			}
		}
		if !found {
			for _, c := range g.chans {
				if c.tempCh >= 0 && g.chans[c.tempCh].ch.ID == g.chans[fed[gr]].ch.ID {
					ref, found = c.ch.ZeroTemperature, true
					break
				}
			}
		}
		if !found {
			return fmt.Errorf("simulate: member group %q: no zero state gives its temperature; add it to a zero state's temperatures in %s", gr, g.sm.File())
		}
		g.groupRef = append(g.groupRef, ref)
	}
	return nil
}

func (g *Generator) prepareFaults() error {
	var structural []Fault
	for _, f := range g.opt.Faults {
		switch f.Kind {
		case FaultDrift, FaultStuck:
			k := -1
			for i, c := range g.chans {
				if c.ch.ID == f.Target {
					k = i
				}
			}
			if k >= 0 && f.Force {
				return fmt.Errorf("simulate: fault %s: a drift in force needs a member as target, %q is a channel; give the channel's rate as strain (50e-6/d)", f, f.Target)
			}
			if k < 0 && f.Kind == FaultDrift {
				if err := g.memberDrift(f); err != nil {
					return err
				}
				continue
			}
			if k < 0 {
				return fmt.Errorf("simulate: fault %s: channel %q is not in the sensor map %s", f, f.Target, g.sm.File())
			}
			if f.Kind == FaultDrift {
				g.chans[k].drift = append(g.chans[k].drift, f)
			} else if g.chans[k].stuckAt.IsZero() || f.Time(g.opt.Start).Before(g.chans[k].stuckAt) {
				g.chans[k].stuckAt = f.Time(g.opt.Start)
			}
		case FaultStiffness:
			if _, ok := g.st.MemberIndex(f.Target); !ok {
				return fmt.Errorf("simulate: fault %s: member %q is not in structure %q", f, f.Target, g.st.Name)
			}
			if !(f.Size > 0 && f.Size < 1) {
				return fmt.Errorf("simulate: fault %s: stiffness loss %g must be between 0 and 1", f, f.Size)
			}
			structural = append(structural, f)
		case FaultSpring:
			if g.springSupport(f.Target) < 0 {
				return fmt.Errorf("simulate: fault %s: node %q is not a support held by a spring in structure %q", f, f.Target, g.st.Name)
			}
			structural = append(structural, f)
		case FaultSettlement:
			n, ok := g.st.NodeIndex(f.Target)
			if !ok {
				return fmt.Errorf("simulate: fault %s: node %q is not in structure %q", f, f.Target, g.st.Name)
			}
			if err := g.settlementPattern(f, n); err != nil {
				return err
			}
			structural = append(structural, f)
		default:
			return fmt.Errorf("simulate: fault %s: unknown kind %q", f, f.Kind)
		}
	}
	sort.SliceStable(structural, func(i, j int) bool {
		return structural[i].Time(g.opt.Start).Before(structural[j].Time(g.opt.Start))
	})
	g.opt.Faults = append(append([]Fault(nil), nonStructural(g.opt.Faults)...), structural...)
	return nil
}

// memberDrift spreads a drift fault on a member over its gauge channels:
// each drifts by the rate, or by the force rate divided by the member's
// E A (the member's gauge force is E A times its gauges' mean strain).
func (g *Generator) memberDrift(f Fault) error {
	e, a, _, ok := g.st.MemberProperties(f.Target)
	if !ok {
		return fmt.Errorf("simulate: fault %s: %q is neither a channel of the sensor map %s nor a member of structure %q", f, f.Target, g.sm.File(), g.st.Name)
	}
	n := 0
	for i, c := range g.chans {
		if !c.ch.Kind.IsGauge() || c.ch.Member != f.Target {
			continue
		}
		per := f
		if f.Force {
			per.Size = f.Size / (e * a)
		}
		g.chans[i].drift = append(g.chans[i].drift, per)
		n++
	}
	if n == 0 {
		return fmt.Errorf("simulate: fault %s: member %q has no gauge channel in the sensor map %s", f, f.Target, g.sm.File())
	}
	return nil
}

// springSupport returns the index of the support of node id that has a
// spring, -1 when there is none.
func (g *Generator) springSupport(id string) int {
	n, ok := g.st.NodeIndex(id)
	if !ok {
		return -1
	}
	for i, s := range g.st.Supports {
		if s.Node == n && (s.Spring[0] != 0 || s.Spring[1] != 0 || s.Spring[2] != 0) {
			return i
		}
	}
	return -1
}

func nonStructural(fs []Fault) []Fault {
	var out []Fault
	for _, f := range fs {
		if f.Kind == FaultDrift || f.Kind == FaultStuck {
			out = append(out, f)
		}
	}
	return out
}

// settlementPattern finds the settlement pattern of node n (the one whose
// only settlement is at n) or adds one with a unit settlement along
// gravity, and records the factor per metre.
func (g *Generator) settlementPattern(f Fault, n int) error {
	grav := gravity(g.st)
	for p, pat := range g.st.Patterns {
		if len(pat.Settlements) != 1 || len(pat.Forces) > 0 || pat.SelfWeight != 0 || len(pat.Temperatures) > 0 {
			continue
		}
		s := pat.Settlements[0]
		if s.Node != n {
			continue
		}
		along := s.D[0]*grav[0] + s.D[1]*grav[1] + s.D[2]*grav[2]
		if along == 0 {
			continue
		}
		g.settle[p] = 1 / along
		g.settleNode[f.Target] = p
		return nil
	}
	sup := -1
	for i, s := range g.st.Supports {
		if s.Node == n {
			sup = i
		}
	}
	if sup < 0 {
		return fmt.Errorf("simulate: fault %s: node %q is not a support", f, f.Target)
	}
	axis := -1
	for k := 0; k < 3; k++ {
		if math.Abs(grav[k]) > 0.999 && g.st.Supports[sup].Fixed[k] {
			axis = k
		}
	}
	if axis < 0 {
		return fmt.Errorf("simulate: fault %s: support %q is not fixed along gravity, so it cannot settle", f, f.Target)
	}
	var d [3]float64
	d[axis] = grav[axis]
	name := "sim_settle_" + f.Target
	if _, dup := g.st.PatternIndex(name); !dup {
		g.st.Patterns = append(g.st.Patterns, model.Pattern{Name: name, Settlements: []model.Settlement{{Node: n, D: d}}})
	}
	p, _ := g.st.PatternIndex(name)
	g.settle[p] = 1
	g.settleNode[f.Target] = p
	return nil
}

// gravity returns the structure's unit gravity vector (default -y in 2D,
// -z in 3D).
func gravity(s *model.Structure) [3]float64 {
	gv := s.Gravity
	n := math.Sqrt(gv[0]*gv[0] + gv[1]*gv[1] + gv[2]*gv[2])
	if n == 0 {
		if s.Dim == 3 {
			return [3]float64{0, 0, -1}
		}
		return [3]float64{0, -1, 0}
	}
	return [3]float64{gv[0] / n, gv[1] / n, gv[2] / n}
}

// preparePatterns decides what drives each pattern.
func (g *Generator) preparePatterns() {
	perm := g.sm.PermanentLoads()
	measured := map[int][]channelInfo{}
	for _, c := range g.chans {
		if c.pattern >= 0 {
			measured[c.pattern] = append(measured[c.pattern], c)
		}
	}
	g.drivers = make([]patternDriver, len(g.st.Patterns))
	g.permanent = make([]float64, len(g.st.Patterns))
	g.loadChannels = map[int]int{}
	for p, chs := range measured {
		g.loadChannels[p] = len(chs)
	}
	for p, pat := range g.st.Patterns {
		g.permanent[p] = perm[pat.Name]
		switch {
		case perm[pat.Name] != 0:
			g.drivers[p] = drivePermanent
		case pureTemperature(pat):
			g.drivers[p] = driveNone // temperatures act through the groups
		case len(measured[p]) > 0:
			chs := measured[p]
			switch {
			case chs[0].ch.Unit == "count":
				g.drivers[p] = driveCount
				g.count[p] = chs[0].ch.Factor
			case isPanel(pat):
				g.drivers[p] = driveDeck
			default:
				g.drivers[p] = driveSlow
				g.slow[p] = g.opt.MeasuredLoad
			}
		case pat.Unknown:
			g.drivers[p] = driveSlow
			g.slow[p] = g.opt.UnknownLoad
		}
		if s, ok := g.opt.Slow[pat.Name]; ok {
			g.drivers[p] = driveSlow
			g.slow[p] = s
		}
	}
}

func pureTemperature(p model.Pattern) bool {
	return len(p.Temperatures) > 0 && len(p.Forces) == 0 && p.SelfWeight == 0 && len(p.Settlements) == 0
}

// isPanel reports whether a pattern is a deck panel: point loads at exactly
// two nodes and nothing else.
func isPanel(p model.Pattern) bool {
	if len(p.Forces) != 2 || p.SelfWeight != 0 || len(p.Temperatures) > 0 || len(p.Settlements) > 0 {
		return false
	}
	return p.Forces[0].Node != p.Forces[1].Node
}

// analyse builds the influence matrix of each structure state.
func (g *Generator) analyse() error {
	g.nPat = len(g.st.Patterns)
	for _, p := range g.st.Patterns {
		g.inputs = append(g.inputs, model.Input{Kind: model.PatternInput, Name: p.Name})
	}
	for _, gr := range g.groups {
		g.inputs = append(g.inputs, model.Input{Kind: model.TemperatureInput, Name: gr})
	}
	members := make([]int, len(g.st.Members))
	for i := range members {
		members[i] = i
	}
	cur := g.st
	solve := func(s *model.Structure, what string) error {
		m, err := model.Analyze(s)
		if err != nil {
			return fmt.Errorf("simulate: analysing %s: %w", what, err)
		}
		h, err := m.Influence(members, g.inputs)
		if err != nil {
			return fmt.Errorf("simulate: influence matrix of %s: %w", what, err)
		}
		ea := make([]float64, len(s.Members))
		for i, mb := range s.Members {
			ea[i] = mb.E * mb.A
		}
		g.states = append(g.states, state{h: h, ea: ea})
		return nil
	}
	if err := solve(cur, "the intact structure "+g.st.Name); err != nil {
		return err
	}
	for _, f := range g.opt.Faults {
		if f.Kind != FaultStiffness && f.Kind != FaultSettlement && f.Kind != FaultSpring {
			continue
		}
		next := cur
		switch f.Kind {
		case FaultStiffness, FaultSpring:
			next = copyStructure(cur)
			if f.Kind == FaultStiffness {
				m, _ := next.MemberIndex(f.Target)
				next.Members[m].E *= 1 - f.Size
			} else {
				sp := &next.Supports[g.springSupport(f.Target)]
				for k := range sp.Spring {
					sp.Spring[k] *= 1 + f.Size
				}
			}
			if err := solve(next, "structure "+g.st.Name+" after fault "+f.String()); err != nil {
				return err
			}
		default:
			// A settlement does not change the stiffness: same state.
			g.states = append(g.states, g.states[len(g.states)-1])
		}
		cur = next
		g.faultAt = append(g.faultAt, f.Time(g.opt.Start))
	}
	// Zero-state forces of the gauged members, intact structure.
	zs := g.sm.ZeroStates()
	h0 := g.states[0].h
	for i := range g.chans {
		c := &g.chans[i]
		if c.member < 0 {
			continue
		}
		f := make([]float64, len(g.inputs))
		z := zs[c.ch.ZeroState]
		for name, v := range z.Loads {
			if p, ok := g.st.PatternIndex(name); ok {
				f[p] = v
			}
		}
		for k, gr := range g.groups {
			if t, ok := z.Temperatures[gr]; ok {
				f[g.nPat+k] = t - g.groupRef[k]
			}
		}
		for k, v := range f {
			c.zeroN += h0.At(c.member, k) * v
		}
	}
	return nil
}

// prepareDeck locates the deck panels along the deck axis.
func (g *Generator) prepareDeck() error {
	grav := gravity(g.st)
	var pats []int
	for p, d := range g.drivers {
		if d == driveDeck {
			pats = append(pats, p)
		}
	}
	if len(pats) == 0 {
		return nil
	}
	// The deck axis is the horizontal axis along which the panel nodes
	// spread most.
	best, spread := 0, -1.0
	for k := 0; k < 3; k++ {
		if math.Abs(grav[k]) > 0.5 {
			continue
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, p := range pats {
			for _, nf := range g.st.Patterns[p].Forces {
				x := g.st.Nodes[nf.Node].X[k]
				lo, hi = math.Min(lo, x), math.Max(hi, x)
			}
		}
		if hi-lo > spread {
			best, spread = k, hi-lo
		}
	}
	g.deckAxis = best
	g.deckLo, g.deckHi = math.Inf(1), math.Inf(-1)
	for _, p := range pats {
		pat := g.st.Patterns[p]
		a := g.st.Nodes[pat.Forces[0].Node].X[best]
		b := g.st.Nodes[pat.Forces[1].Node].X[best]
		w := 0.0
		for _, nf := range pat.Forces {
			w += nf.F[0]*grav[0] + nf.F[1]*grav[1] + nf.F[2]*grav[2]
		}
		if w <= 0 {
			return fmt.Errorf("simulate: deck panel pattern %q does not act along gravity", pat.Name)
		}
		g.panels = append(g.panels, deckPanel{pattern: p, lo: math.Min(a, b), hi: math.Max(a, b), weight: w})
		g.deckLo, g.deckHi = math.Min(g.deckLo, math.Min(a, b)), math.Max(g.deckHi, math.Max(a, b))
	}
	sort.Slice(g.panels, func(i, j int) bool { return g.panels[i].lo < g.panels[j].lo })
	return nil
}

// Random streams, one per part of the scenario, so that changing one part
// (say the bad-message rate) leaves the others as they were.
const (
	streamTraffic = iota + 1
	streamWeather
	streamLoads
	streamNoise
	streamBad
	streamCrews
)

func (g *Generator) rng(stream uint64) *rand.Rand {
	return rand.New(rand.NewPCG(g.opt.Seed, stream))
}

// All yields the scenario's steps in time order. Each range over it starts
// the scenario afresh, so two ranges give identical steps.
func (g *Generator) All() iter.Seq2[Step, error] {
	return func(yield func(Step, error) bool) {
		r := g.newRun()
		n := g.Steps()
		for k := 0; k < n; k++ {
			st, err := r.step(k)
			if !yield(st, err) || err != nil {
				return
			}
		}
	}
}
