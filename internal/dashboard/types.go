// Package dashboard serves the read-only JSON API and the built-in
// single-page dashboard of the monitor: the truss drawn to scale with its
// members coloured by Baarda's normalised residual w, the series of measured
// and predicted member force with the acceptance band, the fit status, the
// estimated unknown loads and the event list.
//
// The package reads everything through a Source; it knows nothing of the
// model, reconcile or sensors packages. The page is embedded in the binary
// and needs no network. Binding the listener to loopback is the caller's
// concern.
//
// The dashboard is a monitoring aid, not a safety verdict: decisions rest
// with a licensed engineer under local codes.
package dashboard

import (
	"context"
	"errors"
	"time"
	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// Caution is the safety text shown on the page and returned in every state
// when the Source leaves State.Caution empty.
const Caution = "This dashboard is a monitoring aid, not a safety verdict. An alarm, or the absence of one, " +
	"does not establish that the structure is safe or unsafe. Decisions rest with a licensed engineer " +
	"under local codes and the owner's inspection regime; the model is only as good as its inputs."

// ErrNotFound is wrapped by a Source's errors for an unknown structure or
// member; the handler answers such errors with 404.
var ErrNotFound = errors.New("not found")

// Source is what the dashboard reads. Implementations must be safe for
// concurrent use: the handler calls them from many requests at once.
type Source interface {
	// Structures returns the names of the monitored structures, in the
	// order the page lists them.
	Structures() []string
	// State returns the latest reconciled state of one structure. An
	// unknown structure gives an error wrapping ErrNotFound.
	State(structure string) (State, error)
	// Series returns the per-epoch history of one gauged member with
	// from <= time < to, oldest first.
	Series(structure, member string, from, to time.Time) (Series, error)
	// Events returns the alarm events of one structure with
	// from <= time < to, oldest first. ctx is the request's context (a
	// store query ends with it).
	Events(ctx context.Context, structure string, from, to time.Time) ([]Event, error)
}

// State is the latest reconciled epoch of one structure together with its
// geometry.
type State struct {
	// Structure is the structure's name as used in the API paths.
	Structure string
	// Title is a human-readable name ("Alder Creek footbridge").
	Title string
	// ModelVersion is the content hash of the model in force.
	ModelVersion string
	// Epoch is the time of the latest reconciled epoch; the zero time means
	// no epoch has been reconciled yet.
	Epoch time.Time
	// Geometry is the truss as drawn.
	Geometry Geometry
	// Gauged holds one entry per gauged member for the latest epoch.
	Gauged []MemberState
	// CriticalValue k of the local test (Baarda's w-test), e.g. 3.29 for
	// alpha0 = 0.001. The acceptance band is predicted +- k sigma_residual.
	CriticalValue float64
	// Fit is the global test of the latest epoch.
	Fit Fit
	// Loads are the estimated unknown load magnitudes of the latest epoch.
	Loads []LoadEstimate
	// Members is the total state of every member in the latest epoch (see
	// MemberTotal); Design the design basis of the utilisation (nil when
	// the structure declares none).
	Members []MemberTotal
	Design  *Design
	// Alarms are the alarms active after the latest epoch, each with its
	// causes as of its latest revision.
	Alarms []ActiveAlarm
	// Adapted is the fit carrying the identified hypotheses while an alarm
	// is active (nil when none is carried): the members' W and the Loads
	// then come from it, Fit stays the nominal model's test.
	Adapted *AdaptedFit
	// Caution is the safety text; the handler substitutes Caution when empty.
	Caution string
}

// ActiveAlarm is one firing alarm.
type ActiveAlarm struct {
	// Rule and Subject name the alarm.
	Rule    alerts.RuleName
	Subject string
	// Since is when its raise condition first held, FiredAt when it was
	// raised.
	Since, FiredAt time.Time
	// Causes are its causes in separability groups; for a statistical
	// alarm their sizes are estimated over the epochs since the fault
	// began, as of CausesAt (zero: as of the raise).
	Causes   []reconcile.RankedCause
	CausesAt time.Time
	// LoadShifts are the unknown-load estimates that left their recent
	// distribution when the alarm rose: they may be absorbing the fault.
	LoadShifts []LoadShift
}

// LoadShift is an unknown-load estimate that left its recent distribution
// when an alarm rose.
type LoadShift struct {
	// Pattern is the load pattern's name.
	Pattern string
	// Value is the estimate when the alarm rose, Mean and StdDev those of
	// the recent accepted epochs before it, all in Unit.
	Value, Mean, StdDev float64
	Unit                string
	// Z is the shift in combined standard deviations.
	Z float64
}

// AdaptedFit is the fit with the hypotheses carried while alarms are
// active.
type AdaptedFit struct {
	// Hypotheses are the carried hypotheses with their sizes in the
	// adapted fit (Cause.T is 0: they are parameters, not tests).
	Hypotheses []reconcile.RankedCause
	// ChiSquare, DOF, PValue and Rejected are the adapted fit's global test.
	ChiSquare float64
	DOF       int
	PValue    float64
	Rejected  bool
}

// Geometry is the drawn shape of a truss in metres.
type Geometry struct {
	// Dimension is 2 for a plane truss (x, y; y up) or 3 for a space truss
	// (x, y, z; z up).
	Dimension int
	// Nodes are the joints.
	Nodes []Node
	// Members are the bars.
	Members []Member
	// Supports are the restrained nodes, drawn with support symbols.
	Supports []Support
	// Loads are the nodal loads of the structure's load patterns, drawn as
	// arrows.
	Loads []NodalLoad
}

// Support is one restrained node.
type Support struct {
	// Node is the node id.
	Node string
	// Fixed and Spring say which global directions (x, y, z) are fixed or
	// held by a spring.
	Fixed, Spring [3]bool
	// Inclined is true for a roller on an inclined plane or line.
	Inclined bool
}

// NodalLoad is the direction of one pattern's force at one node.
type NodalLoad struct {
	// Node is the node id and Pattern the load pattern's name.
	Node, Pattern string
	// Direction is the unit vector of the force (global x, y, z).
	Direction [3]float64
	// Unknown is true for a pattern whose magnitude is estimated from the
	// gauges.
	Unknown bool
}

// Node is one joint with its coordinates in metres; Z is 0 for plane trusses.
type Node struct {
	ID      string
	X, Y, Z float64
}

// Member is one bar between two nodes.
type Member struct {
	ID string
	// Start and End are node ids.
	Start, End string
	// Gauged says whether the member carries strain gauges.
	Gauged bool
	// GaugeOrStiffness is true for a gauged member whose gauge fault and
	// change of stiffness move the gauges alike, so the data cannot tell
	// them apart (a member in a statically determinate part of the truss:
	// its force does not depend on its stiffness).
	GaugeOrStiffness bool
}

// MemberState is the reconciliation result of one gauged member in one epoch.
type MemberState struct {
	// ID is the member id.
	ID string
	// Measured is the measured axial force in N (tension positive); NaN
	// when the gauge did not report in the epoch (written as null).
	Measured float64
	// Predicted is the model's force in N including the estimated unknown
	// loads, so that Measured - Predicted is the residual e.
	Predicted float64
	// SigmaResidual is the standard deviation of the residual e in N,
	// sqrt((Q_e)_ii).
	SigmaResidual float64
	// W is Baarda's normalised residual e_i / sqrt((Q_e)_ii); while the
	// fit carries adapted hypotheses, that of the adapted fit (the alarm's
	// own member keeps its nominal w).
	W float64
	// WNominal is the w of the nominal fit while the fit is adapted, NaN
	// otherwise (written as null).
	WNominal float64
	// Redundancy is the redundancy number r_i = (Q_e W)_ii, in [0, 1].
	Redundancy float64
	// MDB is the minimal detectable bias in N.
	MDB float64
	// Checkable is false when the redundancy is too small to test the
	// member (or its gauge is missing in this epoch); such a member never
	// alarms.
	Checkable bool
	// Alarm says whether an alarm on this member is active.
	Alarm bool
}

// Fit is the global (chi-square) test of one epoch.
type Fit struct {
	// ChiSquare is T = e^T W e.
	ChiSquare float64
	// DOF is G - p, the degrees of freedom.
	DOF int
	// PValue is the chi-square survival probability of T.
	PValue float64
	// Alpha is the test's significance level.
	Alpha float64
	// Rejected says whether the global test rejected the model.
	Rejected bool
}

// LoadEstimate is one estimated unknown load magnitude (theta_hat) with its
// standard deviation.
type LoadEstimate struct {
	// Pattern is the load pattern's name.
	Pattern string
	// Value is the estimated magnitude in Unit.
	Value float64
	// StdDev is its standard deviation in Unit.
	StdDev float64
	// Unit of Value and StdDev: the pattern's engineering unit (for
	// example "kPa", from its reference load), or "pattern factor" when
	// the pattern declares no reference load.
	Unit string
	// Factor and FactorStdDev are the estimated pattern factor and its
	// standard deviation (the multiple of the pattern as defined).
	Factor, FactorStdDev float64
}

// Series is the history of one gauged member.
type Series struct {
	// Structure and Member name the series.
	Structure, Member string
	// CriticalValue k of the w-test used for the band.
	CriticalValue float64
	// Points are the epochs, oldest first.
	Points []SeriesPoint
}

// SeriesPoint is one epoch of a member's series.
type SeriesPoint struct {
	// Time is the epoch time.
	Time time.Time
	// Measured and Predicted forces in N; SigmaResidual in N. Use NaN for
	// a value the epoch lacks (a missing gauge): it is written as null and
	// the chart leaves a gap.
	Measured, Predicted, SigmaResidual float64
	// W is the normalised residual.
	W float64
	// Checkable as in MemberState.
	Checkable bool
	// Alarm says whether an alarm on the member was active at Time.
	Alarm bool
}

// Event is one alarm event (raised or cleared) with its evidence.
type Event struct {
	// Time the event happened.
	Time time.Time
	// Rule is the alarm rule's name.
	Rule alerts.RuleName
	// Subject is what the rule is about: a member, gauge, channel or the
	// structure.
	Subject string
	// Kind says whether the event raised or cleared its alarm.
	Kind alerts.EventKind
	// W is the normalised residual that raised it (0 when not applicable).
	W float64
	// Size is the estimated size of the deviation in SizeUnit.
	Size float64
	// SizeUnit is the unit of Size, e.g. "N".
	SizeUnit string
	// Message is a one-line human-readable summary.
	Message string
	// Causes are the top-ranked candidate causes, best first.
	Causes []reconcile.RankedCause
	// CausesAt is the epoch of the latest revision of a raised event's
	// causes while its alarm was active (zero: the raising epoch's).
	CausesAt time.Time
	// LoadShifts are the unknown loads flagged when the alarm rose.
	LoadShifts []LoadShift
}
