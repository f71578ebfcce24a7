package simulate

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"trussmonitor/internal/units"
)

// FaultKind names what goes wrong.
type FaultKind string

// The fault kinds the simulator can inject.
const (
	// FaultDrift adds a ramp to one channel's engineering value (for a
	// gauge: strain per unit time), starting at the fault time; with a
	// member as target, to each of the member's gauge channels (a rate in
	// force per unit time is divided by the member's E A: the member's
	// gauge force drifts at that rate).
	FaultDrift FaultKind = "drift"
	// FaultStuck freezes one channel's raw value at the last reading sent
	// before the fault time; later readings repeat it without noise.
	FaultStuck FaultKind = "stuck"
	// FaultStiffness reduces the axial stiffness E*A of one member by a
	// fraction from the fault time on. Forces come from the re-analysed
	// structure; the member's own gauges see strain N/(E'A) (the loss is
	// taken as uniform along the member, as in a loss of section).
	FaultStiffness FaultKind = "stiffness"
	// FaultSettlement moves a support node by a distance (metres) from the
	// fault time on, through the structure's settlement pattern for that node
	// or, if there is none, a prescribed displacement along gravity.
	FaultSettlement FaultKind = "settlement"
	// FaultSpring changes the stiffness of every spring of one support node
	// by a fraction from the fault time on (-0.5: half as stiff, a worn
	// bearing; +0.5: half as stiff again, a seized one). Forces come from
	// the re-analysed structure.
	FaultSpring FaultKind = "spring"
)

// DefaultStiffnessLoss is the fraction of E*A lost when a stiffness fault
// gives no size.
const DefaultStiffnessLoss = 0.3

// Fault is one injected fault.
type Fault struct {
	// Kind is what goes wrong.
	Kind FaultKind
	// Target is a channel id (drift, stuck), a member id (stiffness) or a
	// support node id (settlement).
	Target string
	// Offset is the fault time measured from the scenario start; used when
	// At is zero.
	Offset time.Duration
	// At is the absolute fault time; when zero, Offset from the start is
	// used.
	At time.Time
	// Size is the drift rate in engineering units per second (drift), the
	// fraction of E*A lost (stiffness, 0 < Size < 1) or the settlement in
	// metres along gravity (settlement, positive = downwards) or the
	// relative change of the spring stiffness (spring, Size > -1, not 0).
	// Unused for stuck.
	Size float64
	// Force is true for a drift whose Size is a force rate (N/s) of the
	// target member's gauge group rather than an engineering-value rate.
	Force bool
	// Spec is the text the fault was parsed from, for messages.
	Spec string
}

// Time returns the absolute fault time for a scenario that starts at start.
func (f Fault) Time(start time.Time) time.Time {
	if !f.At.IsZero() {
		return f.At
	}
	return start.Add(f.Offset)
}

// String returns the fault in the flag syntax.
func (f Fault) String() string {
	if f.Spec != "" {
		return f.Spec
	}
	at := f.Offset.String()
	if !f.At.IsZero() {
		at = f.At.UTC().Format(time.RFC3339Nano)
	}
	switch f.Kind {
	case FaultStuck:
		return fmt.Sprintf("%s:%s:%s", f.Kind, f.Target, at)
	case FaultDrift:
		return fmt.Sprintf("%s:%s:%s:%g/s", f.Kind, f.Target, at, f.Size)
	default:
		return fmt.Sprintf("%s:%s:%s:%g", f.Kind, f.Target, at, f.Size)
	}
}

// ErrFaultSpec marks a fault specification that cannot be read.
var ErrFaultSpec = errors.New("bad fault specification")

// ParseFault reads a fault in the syntax KIND:TARGET:AT[:SIZE].
//
//	stiffness:D2:10m:0.3              member D2 loses 30 % of E*A 10 min after the start
//	stiffness:D2:2026-06-01T14:00:00Z  the same, at an absolute time, default 30 %
//	drift:B4_a:2h:50e-6/h             channel B4_a drifts by 50e-6 (strain) per hour from 2 h on
//	drift:B2:3h:5kN/d                 the gauges of member B2 drift by 5 kN a day (as force) from 3 h on
//	stuck:T4_a:1h                     channel T4_a freezes 1 h after the start
//	settlement:L8:3h:0.005            support L8 settles 5 mm (also "5 mm") at 3 h
//	spring:L8:3h:-0.5                 the springs of support L8 lose half their stiffness at 3 h
//
// AT is a Go duration from the scenario start (10m, 2h, 14h30m) or an
// absolute RFC 3339 time. A drift rate is per hour unless written with /s,
// /min, /h or /d. A settlement is in metres unless it carries a length unit.
func ParseFault(spec string) (Fault, error) {
	f := Fault{Spec: spec}
	fail := func(format string, args ...any) (Fault, error) {
		return Fault{}, fmt.Errorf("%w %q: %s; the form is KIND:TARGET:AT[:SIZE], for example stiffness:D2:10m:0.3, drift:B4_a:2h:50e-6/h, stuck:T4_a:1h, settlement:L8:3h:0.005",
			ErrFaultSpec, spec, fmt.Sprintf(format, args...))
	}
	parts := strings.SplitN(spec, ":", 3)
	if len(parts) < 3 {
		return fail("expected at least KIND:TARGET:AT")
	}
	f.Kind = FaultKind(strings.ToLower(strings.TrimSpace(parts[0])))
	f.Target = strings.TrimSpace(parts[1])
	if f.Target == "" {
		return fail("the target (channel, member or node id) is empty")
	}
	switch f.Kind {
	case FaultDrift, FaultStuck, FaultStiffness, FaultSettlement, FaultSpring:
	default:
		return fail("unknown kind %q (want drift, stuck, stiffness, settlement or spring)", parts[0])
	}
	atText, sizeText, err := splitAt(parts[2])
	if err != nil {
		return fail("%v", err)
	}
	if t, err := time.Parse(time.RFC3339Nano, atText); err == nil {
		f.At = t
	} else if d, err := time.ParseDuration(atText); err == nil {
		if d < 0 {
			return fail("the fault time %q is before the start", atText)
		}
		f.Offset = d
	} else {
		return fail("the fault time %q is neither a duration from the start (2h, 10m) nor an RFC 3339 time", atText)
	}
	switch f.Kind {
	case FaultStuck:
		if sizeText != "" {
			return fail("a stuck fault takes no size (got %q)", sizeText)
		}
	case FaultStiffness:
		f.Size = DefaultStiffnessLoss
		if sizeText != "" {
			v, err := strconv.ParseFloat(sizeText, 64)
			if err != nil || !(v > 0 && v < 1) {
				return fail("the stiffness loss %q must be a fraction of E*A between 0 and 1 (0.3 = 30 %% lost)", sizeText)
			}
			f.Size = v
		}
	case FaultDrift:
		if sizeText == "" {
			return fail("a drift fault needs a rate, for example 50e-6/h")
		}
		v, force, err := parseRate(sizeText)
		if err != nil {
			return fail("%v", err)
		}
		f.Size, f.Force = v, force
	case FaultSpring:
		v, err := strconv.ParseFloat(sizeText, 64)
		if sizeText == "" || err != nil || !(v > -1) || v == 0 || math.IsInf(v, 0) {
			return fail("the spring change %q must be a relative change of the spring stiffness above -1 and not 0 (-0.5 = half as stiff)", sizeText)
		}
		f.Size = v
	case FaultSettlement:
		if sizeText == "" {
			return fail("a settlement fault needs a size, for example 0.005 or 5mm")
		}
		v, err := units.Parse(sizeText, units.Length, "m")
		if err != nil {
			return fail("settlement size: %v", err)
		}
		if v == 0 {
			return fail("the settlement size is zero")
		}
		f.Size = v
	}
	return f, nil
}

// splitAt separates the fault time from the optional size. An RFC 3339 time
// contains colons itself, so the longest prefix that parses as one wins.
func splitAt(rest string) (at, size string, err error) {
	for i := len(rest); i > 0; i-- {
		if i < len(rest) && rest[i] != ':' {
			continue
		}
		if _, err := time.Parse(time.RFC3339Nano, rest[:i]); err == nil {
			if i == len(rest) {
				return rest, "", nil
			}
			return rest[:i], strings.TrimSpace(rest[i+1:]), nil
		}
	}
	at, size, _ = strings.Cut(rest, ":")
	if strings.Contains(size, ":") {
		return "", "", fmt.Errorf("too many fields after the time %q", at)
	}
	return strings.TrimSpace(at), strings.TrimSpace(size), nil
}

// parseRate reads a drift rate such as "50e-6/h" or "5kN/d" and returns it
// per second; force is true when the amount carries a force unit.
func parseRate(text string) (rate float64, force bool, err error) {
	num, per, found := strings.Cut(text, "/")
	seconds := 3600.0
	if found {
		switch strings.TrimSpace(per) {
		case "s":
			seconds = 1
		case "min":
			seconds = 60
		case "h":
			seconds = 3600
		case "d":
			seconds = 86400
		default:
			return 0, false, fmt.Errorf("drift rate %q: unknown time unit %q (want s, min, h or d)", text, per)
		}
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
	if err != nil {
		// An amount with a force unit (5kN): the member's gauge force.
		fv, ferr := units.Parse(strings.TrimSpace(num), units.Force, "N")
		if ferr != nil {
			return 0, false, fmt.Errorf("drift rate %q: %q is neither a number nor a force (%v)", text, num, ferr)
		}
		v, force = fv, true
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false, fmt.Errorf("drift rate %q: %q is not a finite number", text, num)
	}
	if v == 0 {
		return 0, false, fmt.Errorf("drift rate %q is zero", text)
	}
	return v / seconds, force, nil
}
