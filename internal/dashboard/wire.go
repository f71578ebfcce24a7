package dashboard

import (
	"math"
	"time"
	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// The JSON wire format of the API. Non-finite numbers (NaN, +-Inf) are
// written as null, since JSON has no encoding for them; times are RFC 3339
// in UTC with nanoseconds. docs/api.md documents these shapes.

// num is a float64 that is null in JSON when not finite.
type num = *float64

func n(x float64) num {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}

type structuresJSON struct {
	Structures []string `json:"structures"`
}

type errorJSON struct {
	Error string `json:"error"`
}

type stateJSON struct {
	Structure     string             `json:"structure"`
	Title         string             `json:"title"`
	ModelVersion  string             `json:"model_version"`
	Epoch         *string            `json:"epoch"`
	CriticalValue num                `json:"critical_value"`
	Geometry      geometryJSON       `json:"geometry"`
	Gauged        []memberStateJSON  `json:"gauged"`
	Fit           fitJSON            `json:"fit"`
	Loads         []loadEstimateJSON `json:"loads"`
	Members       []memberTotalJSON  `json:"members"`
	Design        *designJSON        `json:"design"`
	Alarms        []activeAlarmJSON  `json:"alarms"`
	Adapted       *adaptedFitJSON    `json:"adapted"`
	Caution       string             `json:"caution"`
	ClockNote     string             `json:"clock_note"`
}

type geometryJSON struct {
	Dimension int             `json:"dimension"`
	Nodes     []nodeJSON      `json:"nodes"`
	Members   []memberJSON    `json:"members"`
	Supports  []supportJSON   `json:"supports"`
	Loads     []nodalLoadJSON `json:"loads"`
}

type supportJSON struct {
	Node     string   `json:"node"`
	Fixed    []string `json:"fixed"`
	Spring   []string `json:"spring"`
	Inclined bool     `json:"inclined"`
}

type nodalLoadJSON struct {
	Node      string     `json:"node"`
	Pattern   string     `json:"pattern"`
	Direction [3]float64 `json:"direction"`
	Unknown   bool       `json:"unknown"`
}

// axesOf lists the names of the true directions, e.g. ["x", "y"].
func axesOf(b [3]bool) []string {
	out := []string{}
	for k, on := range b {
		if on {
			out = append(out, "xyz"[k:k+1])
		}
	}
	return out
}

type nodeJSON struct {
	ID string `json:"id"`
	X  num    `json:"x"`
	Y  num    `json:"y"`
	Z  num    `json:"z"`
}

type memberJSON struct {
	ID               string `json:"id"`
	Start            string `json:"start"`
	End              string `json:"end"`
	Gauged           bool   `json:"gauged"`
	GaugeOrStiffness bool   `json:"gauge_or_stiffness"`
}

type memberStateJSON struct {
	ID            string `json:"id"`
	Measured      num    `json:"measured_n"`
	Predicted     num    `json:"predicted_n"`
	SigmaResidual num    `json:"sigma_residual_n"`
	BandLow       num    `json:"band_low_n"`
	BandHigh      num    `json:"band_high_n"`
	W             num    `json:"w"`
	WNominal      num    `json:"w_nominal"`
	Redundancy    num    `json:"redundancy"`
	MDB           num    `json:"mdb_n"`
	Checkable     bool   `json:"checkable"`
	Alarm         bool   `json:"alarm"`
}

type activeAlarmJSON struct {
	Rule       string          `json:"rule"`
	Subject    string          `json:"subject"`
	Since      string          `json:"since"`
	FiredAt    string          `json:"fired_at"`
	Causes     []causeJSON     `json:"causes"`
	CausesAt   *string         `json:"causes_at"`
	LoadShifts []loadShiftJSON `json:"load_shifts"`
}

type loadShiftJSON struct {
	Pattern string `json:"pattern"`
	Value   num    `json:"value"`
	Mean    num    `json:"recent_mean"`
	StdDev  num    `json:"recent_std_dev"`
	Unit    string `json:"unit"`
	Z       num    `json:"z"`
}

type adaptedFitJSON struct {
	Hypotheses []causeJSON `json:"hypotheses"`
	ChiSquare  num         `json:"chi_square"`
	DOF        int         `json:"dof"`
	PValue     num         `json:"p_value"`
	Rejected   bool        `json:"rejected"`
}

type fitJSON struct {
	ChiSquare num  `json:"chi_square"`
	DOF       int  `json:"dof"`
	PValue    num  `json:"p_value"`
	Alpha     num  `json:"alpha"`
	Rejected  bool `json:"rejected"`
}

type loadEstimateJSON struct {
	Pattern      string `json:"pattern"`
	Value        num    `json:"value"`
	StdDev       num    `json:"std_dev"`
	Unit         string `json:"unit"`
	Factor       num    `json:"factor"`
	FactorStdDev num    `json:"factor_std_dev"`
}

type seriesJSON struct {
	Structure     string            `json:"structure"`
	Member        string            `json:"member"`
	From          string            `json:"from"`
	To            string            `json:"to"`
	CriticalValue num               `json:"critical_value"`
	Total         int               `json:"total_points"`
	Points        []seriesPointJSON `json:"points"`
}

type seriesPointJSON struct {
	Time          string `json:"time"`
	Measured      num    `json:"measured_n"`
	Predicted     num    `json:"predicted_n"`
	SigmaResidual num    `json:"sigma_residual_n"`
	BandLow       num    `json:"band_low_n"`
	BandHigh      num    `json:"band_high_n"`
	W             num    `json:"w"`
	Checkable     bool   `json:"checkable"`
	Alarm         bool   `json:"alarm"`
}

type eventsJSON struct {
	Structure string      `json:"structure"`
	From      string      `json:"from"`
	To        string      `json:"to"`
	Events    []eventJSON `json:"events"`
}

type eventJSON struct {
	Time       string          `json:"time"`
	Rule       string          `json:"rule"`
	Subject    string          `json:"subject"`
	Kind       string          `json:"kind"`
	W          num             `json:"w"`
	Size       num             `json:"size"`
	SizeUnit   string          `json:"size_unit"`
	Message    string          `json:"message"`
	Causes     []causeJSON     `json:"causes"`
	CausesAt   *string         `json:"causes_at"`
	LoadShifts []loadShiftJSON `json:"load_shifts"`
}

type causeJSON struct {
	// Text is the cause's wording (alerts.CauseText).
	Text        string `json:"text"`
	Kind        string `json:"kind"`
	Subject     string `json:"subject"`
	Label       string `json:"label"`
	T           num    `json:"t"`
	Size        num    `json:"size"`
	Unit        string `json:"unit"`
	Std         num    `json:"std,omitempty"`
	Group       int    `json:"group,omitempty"`
	Implausible bool   `json:"implausible,omitempty"`
}

// timeText formats t as RFC 3339 with nanoseconds in UTC.
func timeText(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

// band returns the acceptance band predicted -+ k sigma.
func band(predicted, sigma, k float64) (lo, hi float64) {
	return predicted - k*sigma, predicted + k*sigma
}

func toStateJSON(s State) stateJSON {
	out := stateJSON{
		Structure:     s.Structure,
		Title:         s.Title,
		ModelVersion:  s.ModelVersion,
		CriticalValue: n(s.CriticalValue),
		Geometry: geometryJSON{
			Dimension: s.Geometry.Dimension,
			Nodes:     make([]nodeJSON, 0, len(s.Geometry.Nodes)),
			Members:   make([]memberJSON, 0, len(s.Geometry.Members)),
			Supports:  make([]supportJSON, 0, len(s.Geometry.Supports)),
			Loads:     make([]nodalLoadJSON, 0, len(s.Geometry.Loads)),
		},
		Gauged: make([]memberStateJSON, 0, len(s.Gauged)),
		Fit: fitJSON{
			ChiSquare: n(s.Fit.ChiSquare), DOF: s.Fit.DOF, PValue: n(s.Fit.PValue),
			Alpha: n(s.Fit.Alpha), Rejected: s.Fit.Rejected,
		},
		Loads:   make([]loadEstimateJSON, 0, len(s.Loads)),
		Members: toMemberTotalsJSON(s.Members),
		Design:  toDesignJSON(s.Design),
		Caution: s.Caution,
	}
	if out.Caution == "" {
		out.Caution = Caution
	}
	if !s.Epoch.IsZero() {
		e := timeText(s.Epoch)
		out.Epoch = &e
	}
	for _, nd := range s.Geometry.Nodes {
		out.Geometry.Nodes = append(out.Geometry.Nodes, nodeJSON{ID: nd.ID, X: n(nd.X), Y: n(nd.Y), Z: n(nd.Z)})
	}
	for _, m := range s.Geometry.Members {
		out.Geometry.Members = append(out.Geometry.Members, memberJSON(m))
	}
	for _, sp := range s.Geometry.Supports {
		out.Geometry.Supports = append(out.Geometry.Supports, supportJSON{Node: sp.Node, Fixed: axesOf(sp.Fixed), Spring: axesOf(sp.Spring), Inclined: sp.Inclined})
	}
	for _, l := range s.Geometry.Loads {
		out.Geometry.Loads = append(out.Geometry.Loads, nodalLoadJSON(l))
	}
	for _, m := range s.Gauged {
		lo, hi := band(m.Predicted, m.SigmaResidual, s.CriticalValue)
		out.Gauged = append(out.Gauged, memberStateJSON{
			ID: m.ID, Measured: n(m.Measured), Predicted: n(m.Predicted), SigmaResidual: n(m.SigmaResidual),
			BandLow: n(lo), BandHigh: n(hi), W: n(m.W), WNominal: n(m.WNominal), Redundancy: n(m.Redundancy), MDB: n(m.MDB),
			Checkable: m.Checkable, Alarm: m.Alarm,
		})
	}
	for _, l := range s.Loads {
		out.Loads = append(out.Loads, loadEstimateJSON{Pattern: l.Pattern, Value: n(l.Value), StdDev: n(l.StdDev), Unit: l.Unit,
			Factor: n(l.Factor), FactorStdDev: n(l.FactorStdDev)})
	}
	out.Alarms = make([]activeAlarmJSON, 0, len(s.Alarms))
	for _, a := range s.Alarms {
		out.Alarms = append(out.Alarms, activeAlarmJSON{Rule: string(a.Rule), Subject: a.Subject, Since: timeText(a.Since), FiredAt: timeText(a.FiredAt),
			Causes: toCausesJSON(a.Causes), CausesAt: optTime(a.CausesAt), LoadShifts: toLoadShiftsJSON(a.LoadShifts)})
	}
	if a := s.Adapted; a != nil {
		out.Adapted = &adaptedFitJSON{Hypotheses: toCausesJSON(a.Hypotheses), ChiSquare: n(a.ChiSquare), DOF: a.DOF, PValue: n(a.PValue), Rejected: a.Rejected}
	}
	return out
}

func toCausesJSON(cs []reconcile.RankedCause) []causeJSON {
	out := make([]causeJSON, 0, len(cs))
	for _, c := range cs {
		out = append(out, causeJSON{Text: alerts.CauseText(c), Kind: c.Kind.String(), Subject: c.Subject, Label: c.Label, T: n(c.T), Size: n(c.Size), Unit: c.Unit,
			Std: n(c.Std), Group: c.Group, Implausible: c.Implausible})
	}
	return out
}

func toLoadShiftsJSON(ls []LoadShift) []loadShiftJSON {
	out := make([]loadShiftJSON, 0, len(ls))
	for _, l := range ls {
		out = append(out, loadShiftJSON{Pattern: l.Pattern, Value: n(l.Value), Mean: n(l.Mean), StdDev: n(l.StdDev), Unit: l.Unit, Z: n(l.Z)})
	}
	return out
}

func toSeriesPointJSON(p SeriesPoint, k float64) seriesPointJSON {
	lo, hi := band(p.Predicted, p.SigmaResidual, k)
	return seriesPointJSON{
		Time: timeText(p.Time), Measured: n(p.Measured), Predicted: n(p.Predicted),
		SigmaResidual: n(p.SigmaResidual), BandLow: n(lo), BandHigh: n(hi), W: n(p.W),
		Checkable: p.Checkable, Alarm: p.Alarm,
	}
}

func toEventJSON(e Event) eventJSON {
	out := eventJSON{
		Time: timeText(e.Time), Rule: string(e.Rule), Subject: e.Subject, Kind: string(e.Kind),
		W: n(e.W), Size: n(e.Size), SizeUnit: e.SizeUnit, Message: e.Message,
		Causes: toCausesJSON(alerts.ShownCauses(e.Causes)), CausesAt: optTime(e.CausesAt), LoadShifts: toLoadShiftsJSON(e.LoadShifts),
	}
	return out
}
