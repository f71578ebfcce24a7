// Package report writes the replay report folder: index.html (self-contained,
// inline CSS and SVG, no scripts, no network), epochs.csv and events.csv.
//
// The same Report gives byte-identical files: columns are in a fixed order,
// floats are written with strconv 'g' -1 (shortest text that reads back to the
// same float64), times as UTC RFC 3339 with nanoseconds, and nothing depends
// on the wall clock or on map order. Long periods are reduced for the plots
// (minimum and maximum per pixel column) so a day at 1 Hz stays small; the
// CSV files keep every epoch. A report is written while its epochs arrive
// (Stream): epochs.csv row by row, the page from bounded summaries, so
// memory does not grow with the period.
//
// The report is a monitoring aid, not a safety verdict: decisions rest with a
// licensed engineer under local codes.
package report

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"
	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// Caution is the safety text printed in the report when Report.Caution is
// empty.
const Caution = "This report is a monitoring aid, not a safety verdict. An alarm, or the absence of one, " +
	"does not establish that the structure is safe or unsafe. Decisions rest with a licensed engineer " +
	"under local codes and the owner's inspection regime; the model is only as good as its inputs."

// Report is one replayed period of one structure.
type Report struct {
	// Structure is the structure's name; Title a human-readable name.
	Structure, Title string
	// ModelVersion is the content hash of the model used for the replay.
	ModelVersion string
	// From and To bound the replayed period.
	From, To time.Time
	// CriticalValue k of Baarda's w-test (e.g. 3.29 for alpha0 = 0.001); the
	// acceptance band is predicted +- k sigma_residual.
	CriticalValue float64
	// Alpha is the significance level of the global chi-square test.
	Alpha float64
	// Members are the gauged members' ids, in column order.
	Members []string
	// Patterns are the unknown load patterns estimated, in column order.
	Patterns []Pattern
	// Epochs are the reconciled epochs, oldest first.
	Epochs []Epoch
	// Events are the alarm events of the period, oldest first.
	Events []Event
	// Caution is the safety text; Caution is used when empty.
	Caution string
	// MemberSummaries are every member's total force and utilisation over
	// the period (written to members.csv and the HTML; none: no file).
	MemberSummaries []MemberSummary
	// Design is the design standard of the utilisation ("" for none).
	Design string
	// Fatigue holds the fatigue gauges' figures of the period (none when
	// no gauge counts fatigue); shown with FatigueCaution.
	Fatigue []FatigueGauge
}

// Pattern names one unknown load pattern and the unit of its magnitude.
type Pattern struct {
	Name string
	// Unit of the estimate: the pattern's engineering unit (for example
	// "kPa") or "1" for a pattern factor.
	Unit string
	// Reference is the load at pattern factor 1 in Unit (the pattern's
	// reference load; 0 when the estimate is a bare factor), shown beside
	// the plot so that the factor can be read back.
	Reference float64
}

// Epoch is one reconciled epoch.
type Epoch struct {
	// Time of the epoch.
	Time time.Time
	// Members holds one result per Report.Members entry, in that order.
	Members []MemberResult
	// Fit is the global test of the epoch.
	Fit Fit
	// Loads holds one estimate per Report.Patterns entry, in that order.
	Loads []LoadEstimate
}

// MemberResult is one gauged member in one epoch.
type MemberResult struct {
	// Present is false when the member's gauge did not report in the epoch;
	// the other fields are then ignored and written empty.
	Present bool
	// Measured and Predicted axial force in N (tension positive); Predicted
	// includes the estimated unknown loads, so Measured - Predicted is the
	// residual e.
	Measured, Predicted float64
	// SigmaResidual is the standard deviation of e in N, sqrt((Q_e)_ii).
	SigmaResidual float64
	// W is Baarda's normalised residual.
	W float64
	// Checkable is false when the redundancy is too small to test the member.
	Checkable bool
}

// Fit is the global (chi-square) test of one epoch.
type Fit struct {
	ChiSquare float64
	DOF       int
	PValue    float64
	Rejected  bool
}

// LoadEstimate is one estimated unknown load magnitude and its standard
// deviation. Present is false when the pattern was not estimated in the epoch.
type LoadEstimate struct {
	Present       bool
	Value, StdDev float64
}

// Event is one alarm event with its evidence.
type Event struct {
	Time time.Time
	// Rule is the alarm rule's name; Subject the member, gauge, channel or
	// structure it concerns.
	Rule    alerts.RuleName
	Subject string
	// Kind says whether the event raised or cleared its alarm.
	Kind alerts.EventKind
	// W is the normalised residual that raised the event (NaN when none).
	W float64
	// Size is the estimated size of the deviation in SizeUnit.
	Size     float64
	SizeUnit string
	// Message is a one-line summary.
	Message string
	// Causes are the ranked candidate causes, best first; the report shows
	// the first three and the rest of the first group.
	Causes []reconcile.RankedCause
	// CausesAt is the epoch the causes' sizes are estimated as of: for a
	// raised statistical alarm, its last epoch active in the period (the
	// sizes over the epochs since the fault began); zero when not given.
	CausesAt time.Time
	// LoadShifts are the unknown loads flagged when the alarm rose.
	LoadShifts []LoadShift
	// Adapted are the hypotheses the fit carried for the alarm, with
	// their sizes in the adapted fit at CausesAt (T is 0).
	Adapted []reconcile.RankedCause
}

// LoadShift is an unknown-load estimate that left its recent
// distribution when an alarm rose: it may be absorbing the fault.
type LoadShift struct {
	Pattern string
	// Value, Mean and StdDev are the estimate and the mean and standard
	// deviation of the recent accepted epochs before it, in Unit; Z the
	// shift in combined standard deviations.
	Value, Mean, StdDev float64
	Unit                string
	Z                   float64
}

// File names written by Write.
const (
	HTMLFile   = "index.html"
	EpochsFile = "epochs.csv"
	EventsFile = "events.csv"
)

// Write writes index.html, epochs.csv, events.csv (and members.csv when
// the report has member summaries) into dir, creating it if needed, from
// a report that holds its epochs in Epochs. It goes through the same
// Stream as a replay does, so both give the same files. Each file is
// written to a temporary name and renamed, so a reader never sees half a
// file.
func Write(dir string, r *Report) error {
	if r == nil {
		return errors.New("report: nothing to write (nil report)")
	}
	head := *r
	head.Epochs = nil
	s, err := newStream(dir, &head, periodRange(r))
	if err != nil {
		return err
	}
	for _, e := range r.Epochs {
		if err := s.Add(e); err != nil {
			s.Abort()
			return err
		}
	}
	return s.Finish(nil)
}

// validateColumns checks the member ids of the report's columns.
func (r *Report) validateColumns() error {
	seen := make(map[string]bool, len(r.Members))
	for _, m := range r.Members {
		if m == "" {
			return errors.New("a member id is empty; every gauged member needs its id")
		}
		if seen[m] {
			return fmt.Errorf("member %q is listed twice in Members", m)
		}
		seen[m] = true
	}
	return nil
}

func writeFileAtomic(path string, data []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	name := tmp.Name()
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Chmod(name, 0o644); err != nil {
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Rename(name, path); err != nil {
		os.Remove(name)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// timeText formats t as UTC RFC 3339 with nanoseconds.
func timeText(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

// timeOf is the time of unix nanoseconds ns.
func timeOf(ns int64) time.Time { return time.Unix(0, ns).UTC() }

func (r *Report) caution() string {
	if r.Caution != "" {
		return r.Caution
	}
	return Caution
}
