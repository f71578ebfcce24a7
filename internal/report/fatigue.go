package report

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"trussmonitor/internal/fatigue"
)

// FatigueGauge is the fatigue of one gauge's detail over the period, as
// computed by the fatigue count (a monitoring estimate, not a design check
// or an assessment).
type FatigueGauge struct {
	// Gauge is the channel id; Detail describes the detail category and
	// partial factors (e.g. "71 MPa, gamma_Ff 1.00, gamma_Mf 1.15").
	Gauge, Detail string
	// Source says where the counts come from (stored hourly histograms, or
	// a recount of the raw readings).
	Source string
	// Bins are the stress-range histogram of the period, increasing range.
	Bins []FatigueBin
	// ConstantAmplitudeLimit and CutOff are the detail's design Delta
	// sigma_D and Delta sigma_L in Pa (drawn on the histogram); ranges below
	// CutOff cause no damage.
	ConstantAmplitudeLimit, CutOff float64
	// Days are the damage per UTC day.
	Days []FatigueDay
	// Total is the damage of the period, Accumulated the damage since the
	// gauge's start up to the period's end.
	Total, Accumulated float64
	// RatePerDay is the damage per day over the last WindowDays of the
	// period; RemainingYears the projection (1 - Accumulated) / rate
	// (+Inf at a zero rate).
	RatePerDay, WindowDays, RemainingYears float64
}

// FatigueBin is the cycles with a stress range in [Lo, Hi) Pa.
type FatigueBin struct {
	Lo, Hi float64
	Cycles float64
}

// FatigueDay is the damage of one UTC day.
type FatigueDay struct {
	Day    time.Time
	Damage float64
}

// fatigueCSS styles the fatigue plots.
const fatigueCSS = `
.bar{fill:#5a6f8a}.limit{stroke:#a33;stroke-dasharray:4 3}.limit-label{fill:#a33;font-size:11px}`

// FatigueCaution is printed with every fatigue figure (one text for every
// screen: fatigue.Caution).
const FatigueCaution = fatigue.Caution

func sci(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "∞"
	case math.IsNaN(v):
		return "–"
	case v == 0:
		return "0"
	}
	return strconv.FormatFloat(v, 'e', 3, 64)
}

func lifeText(y float64) string {
	switch {
	case math.IsInf(y, 1):
		return "no damage at the recent rate"
	case y > 1e6:
		return "> 1e6 years"
	}
	return strconv.FormatFloat(y, 'f', 1, 64) + " years"
}

// writeFatigue writes the fatigue section: per gauge a summary row, the
// stress-range histogram and the damage accumulated over the period.
func writeFatigue(sb *strings.Builder, r *Report) {
	if len(r.Fatigue) == 0 {
		return
	}
	sb.WriteString("<section id=\"fatigue\">\n<h2>Fatigue at the gauges</h2>\n")
	fmt.Fprintf(sb, "<p class=\"caution\" id=\"fatigue-caution\">%s</p>\n", esc(FatigueCaution))
	sb.WriteString("<p>Stress ranges counted by the rainflow method (ASTM E1049-85) in the local stress E × strain at each gauge; damage by the Palmgren-Miner sum on the EN 1993-1-9 S-N curve of the detail category (slope 3 to 5 million cycles, slope 5 to 100 million, none below the cut-off), with the partial factors given in the sensor map.</p>\n")
	sb.WriteString("<table id=\"fatigue-summary\">\n<thead><tr><th>gauge</th><th>detail</th><th>damage in period</th><th>damage since start</th><th>daily rate</th><th>remaining life</th></tr></thead>\n<tbody>\n")
	for _, g := range r.Fatigue {
		fmt.Fprintf(sb, "<tr><td>%s</td><td>%s</td><td class=\"num\">%s</td><td class=\"num\">%s</td><td class=\"num\">%s /d (last %s d)</td><td class=\"num\">%s</td></tr>\n",
			esc(g.Gauge), esc(g.Detail), sci(g.Total), sci(g.Accumulated), sci(g.RatePerDay), esc(num(g.WindowDays, 1)), esc(lifeText(g.RemainingYears)))
	}
	sb.WriteString("</tbody>\n</table>\n")
	for _, g := range r.Fatigue {
		fmt.Fprintf(sb, "<h3>%s</h3>\n<p class=\"meta\">%s; %s.</p>\n", esc(g.Gauge), esc(g.Detail), esc(g.Source))
		writeHistogramPlot(sb, g)
		writeDamagePlot(sb, g)
	}
	sb.WriteString("</section>\n")
}

// writeHistogramPlot draws cycles per stress-range bin on a logarithmic
// cycle axis, with the detail's Delta sigma_D and cut-off marked.
func writeHistogramPlot(sb *strings.Builder, g FatigueGauge) {
	const h = 220.0
	id := "fatigue-hist-" + idPart(g.Gauge)
	fmt.Fprintf(sb, `<svg id="%s" class="plot" width="%d" height="%d" viewBox="0 0 %d %d" role="img" aria-label="%s" xmlns="http://www.w3.org/2000/svg">`+"\n",
		esc(id), plotW, int(h), plotW, int(h), esc("stress-range histogram of "+g.Gauge))
	hiRange := 0.0
	maxC := 0.0
	for _, b := range g.Bins {
		hiRange = math.Max(hiRange, b.Hi)
		maxC = math.Max(maxC, b.Cycles)
	}
	hiRange = math.Max(hiRange, g.ConstantAmplitudeLimit*1.1)
	if hiRange <= 0 || maxC <= 0 {
		fmt.Fprintf(sb, `<text class="note" x="%d" y="%d">no cycles counted in the period</text>`+"\n</svg>\n", padL+4, padT+12)
		return
	}
	bottom := h - padB
	top := float64(padT)
	decades := math.Max(1, math.Ceil(math.Log10(maxC*1.0001)))
	xOf := func(v float64) float64 { return padL + float64(plotCs)*v/hiRange }
	yOf := func(c float64) float64 {
		if c < 1 {
			c = 1 // half cycles and fractions sit on the axis floor of one cycle
		}
		return bottom - (bottom-top)*math.Log10(c)/decades
	}
	sb.WriteString(`<g class="axes">`)
	for d := 0.0; d <= decades; d++ {
		y := px(yOf(math.Pow(10, d)))
		fmt.Fprintf(sb, `<line class="grid" x1="%d" x2="%d" y1="%s" y2="%s"/><text x="%d" y="%s" text-anchor="end">1e%d</text>`, padL, plotW-padR, y, y, padL-6, px(yOf(math.Pow(10, d))+4), int(d))
	}
	step := niceStep(hiRange/1e6, 8)
	for v := 0.0; v <= hiRange/1e6+1e-9; v += step {
		x := px(xOf(v * 1e6))
		fmt.Fprintf(sb, `<line class="tick" x1="%s" x2="%s" y1="%s" y2="%s"/><text x="%s" y="%s" text-anchor="middle">%s</text>`, x, x, px(bottom), px(bottom+4), x, px(bottom+16), strconv.FormatFloat(v, 'f', -1, 64))
	}
	fmt.Fprintf(sb, `<line class="axis" x1="%d" x2="%d" y1="%d" y2="%s"/><line class="axis" x1="%d" x2="%d" y1="%s" y2="%s"/>`, padL, padL, padT, px(bottom), padL, plotW-padR, px(bottom), px(bottom))
	mid := (top + bottom) / 2
	fmt.Fprintf(sb, `<text x="14" y="%s" text-anchor="middle" transform="rotate(-90 14 %s)">cycles</text>`, px(mid), px(mid))
	fmt.Fprintf(sb, `<text x="%s" y="%s" text-anchor="end">stress range (MPa)</text>`, px(plotW-padR), px(padT+10))
	sb.WriteString("</g>\n")
	for _, b := range g.Bins {
		x0, x1 := xOf(b.Lo), xOf(b.Hi)
		y := yOf(b.Cycles)
		fmt.Fprintf(sb, `<rect class="bar" x="%s" y="%s" width="%s" height="%s"><title>%s to %s MPa: %s cycles</title></rect>`+"\n",
			px(x0), px(y), px(math.Max(x1-x0, 0.6)), px(bottom-y), floatText(b.Lo/1e6), floatText(b.Hi/1e6), strconv.FormatFloat(b.Cycles, 'f', -1, 64))
	}
	for _, l := range []struct {
		v    float64
		text string
	}{{g.CutOff, "cut-off Δσ_L"}, {g.ConstantAmplitudeLimit, "Δσ_D"}} {
		if l.v <= 0 || l.v > hiRange {
			continue
		}
		x := px(xOf(l.v))
		fmt.Fprintf(sb, `<line class="limit" x1="%s" x2="%s" y1="%d" y2="%s"/><text class="limit-label" x="%s" y="%d">%s</text>`+"\n", x, x, padT, px(bottom), px(xOf(l.v)+3), padT+24, esc(l.text))
	}
	sb.WriteString("</svg>\n")
}

// writeDamagePlot draws the damage accumulated since the period's start,
// day by day.
func writeDamagePlot(sb *strings.Builder, g FatigueGauge) {
	if len(g.Days) == 0 {
		return
	}
	t0 := g.Days[0].Day.UnixNano()
	t1 := g.Days[len(g.Days)-1].Day.Add(24 * time.Hour).UnixNano()
	cum := 0.0
	for _, d := range g.Days {
		cum += d.Damage
	}
	lo, hi := 0.0, cum
	if hi <= 0 {
		hi = 1e-9
	}
	ticks := valueTicks(lo, hi)
	if len(ticks) > 0 {
		hi = math.Max(hi, ticks[len(ticks)-1])
	}
	f := frame{t0: t0, t1: t1, y0: lo, y1: hi, h: plotH}
	p := openPlot(sb, "fatigue-damage-"+idPart(g.Gauge), "damage accumulated over the period at "+g.Gauge, f, ticks, sci, "damage D")
	var d strings.Builder
	cum = 0
	fmt.Fprintf(&d, "M%s,%s", px(f.x(t0)), px(f.y(0)))
	for _, day := range g.Days {
		cum += day.Damage
		end := day.Day.Add(24 * time.Hour).UnixNano()
		fmt.Fprintf(&d, " L%s,%s", px(f.x(end)), px(f.y(cum)))
	}
	p.path("measured", d.String())
	p.legend([2]string{"measured", "damage accumulated in the period (Miner's sum)"})
	p.close()
}

// fatigueStyle is the fatigue plots' CSS when the report has any.
func fatigueStyle(r *Report) string {
	if len(r.Fatigue) == 0 {
		return ""
	}
	return fatigueCSS
}
