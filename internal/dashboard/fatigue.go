package dashboard

import (
	"context"
	"net/http"
	"time"

	"trussmonitor/internal/fatigue"
)

// FatigueSource gives the fatigue gauges of a structure for the fatigue
// panel.
type FatigueSource interface {
	Fatigue(ctx context.Context, structure string) ([]FatigueGauge, error)
}

// FatigueGauge is the fatigue state of one gauge's detail: a monitoring
// estimate, not a design check or an assessment.
type FatigueGauge struct {
	Gauge            string
	CategoryMPa      float64 // EN 1993-1-9 detail category, Delta sigma_C
	GammaFf, GammaMf float64
	Start            time.Time // zero: from the first reading
	DamageTotal      float64   // Miner's sum since Start
	RatePerDay       float64   // damage per day over WindowDays
	WindowDays       float64
	RemainingYears   float64 // +Inf at a zero rate
	LastSample       time.Time
	Days             []FatigueDay
}

// FatigueDay is the damage and cycles of one UTC day.
type FatigueDay struct {
	Day    time.Time
	Cycles float64
	Damage float64
}

type fatigueJSON struct {
	Structure string             `json:"structure"`
	Caution   string             `json:"caution"`
	Gauges    []fatigueGaugeJSON `json:"gauges"`
}

type fatigueGaugeJSON struct {
	Gauge          string           `json:"gauge"`
	CategoryMPa    float64          `json:"detail_category_mpa"`
	GammaFf        float64          `json:"gamma_Ff"`
	GammaMf        float64          `json:"gamma_Mf"`
	Start          *string          `json:"start"`
	DamageTotal    num              `json:"damage_total"`
	RatePerDay     num              `json:"damage_per_day"`
	WindowDays     num              `json:"rate_window_days"`
	RemainingYears num              `json:"remaining_life_years"`
	LastSample     *string          `json:"last_sample"`
	Days           []fatigueDayJSON `json:"days"`
}

type fatigueDayJSON struct {
	Day    string  `json:"day"`
	Cycles float64 `json:"cycles"`
	Damage num     `json:"damage"`
}

func optTime(t time.Time) *string {
	if t.IsZero() {
		return nil
	}
	s := timeText(t)
	return &s
}

// fatigueHandler serves GET /api/structures/{name}/fatigue.
func (h *Handler) fatigueHandler(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("name")
	if !h.knownStructure(w, name) {
		return
	}
	out := fatigueJSON{Structure: name, Caution: fatigue.Caution, Gauges: []fatigueGaugeJSON{}}
	if h.opts.Fatigue != nil {
		gs, err := h.opts.Fatigue.Fatigue(r.Context(), name)
		if err != nil {
			writeSourceError(w, "fatigue of structure "+name, err)
			return
		}
		for _, g := range gs {
			j := fatigueGaugeJSON{Gauge: g.Gauge, CategoryMPa: g.CategoryMPa, GammaFf: g.GammaFf, GammaMf: g.GammaMf,
				Start: optTime(g.Start), DamageTotal: n(g.DamageTotal), RatePerDay: n(g.RatePerDay), WindowDays: n(g.WindowDays),
				RemainingYears: n(g.RemainingYears), LastSample: optTime(g.LastSample), Days: []fatigueDayJSON{}}
			for _, d := range g.Days {
				j.Days = append(j.Days, fatigueDayJSON{Day: d.Day.UTC().Format("2006-01-02"), Cycles: d.Cycles, Damage: n(d.Damage)})
			}
			out.Gauges = append(out.Gauges, j)
		}
	}
	writeJSON(w, http.StatusOK, out)
}
