package report

import (
	"bytes"
	"fmt"
	"html"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"
	"trussmonitor/internal/alerts"
)

// esc escapes text for HTML and XML alike (numeric entities only).
func esc(s string) string { return html.EscapeString(s) }

// idPart makes s usable in an id attribute: letters, digits, '-' and '_'
// are kept, every other byte becomes '_'.
func idPart(s string) string {
	b := []byte(s)
	for i, c := range b {
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_') {
			b[i] = '_'
		}
	}
	return string(b)
}

func kN(v float64) string { return strconv.FormatFloat(v/1000, 'f', 2, 64) + " kN" }

// num formats a value for tables: fixed decimals, an en dash for NaN.
func num(v float64, dec int) string {
	if math.IsNaN(v) {
		return "–"
	}
	return strconv.FormatFloat(v, 'f', dec, 64)
}

func sizeText(v float64, unit string) string {
	switch {
	case math.IsNaN(v):
		return "–"
	case unit == "N":
		return kN(v)
	case unit == "" || unit == "1":
		return strconv.FormatFloat(v, 'g', 3, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64) + " " + unit
}

const css = `body{font:14px/1.4 system-ui,sans-serif;color:#1d2a35;margin:0 auto;max-width:960px;padding:0 16px 40px}
h1{font-size:1.5em;margin:.8em 0 .2em}h2{font-size:1.15em;margin:1.4em 0 .4em;border-bottom:1px solid #d5dbe0}
h3{font-size:1em;margin:1em 0 .2em}
.caution{background:#fff4d6;border:1px solid #e8cf85;padding:.6em .8em;border-radius:4px}
table{border-collapse:collapse;margin:.4em 0}th,td{text-align:left;padding:.15em .9em .15em 0;border-bottom:1px solid #e3e7ea;vertical-align:top}
td.num{font-variant-numeric:tabular-nums;text-align:right}
ol{margin:0;padding-left:1.2em}.meta{color:#55616c}code{font-size:.95em}
svg.plot{display:block;max-width:100%;height:auto;background:#fff;border:1px solid #d5dbe0;margin:.3em 0}
svg text{font-size:11px;fill:#44505b}
.grid{stroke:#e8ecef}.tick,.axis{stroke:#66727d}
.band{fill:#7890a6;fill-opacity:.25;stroke:none}.band-sd{fill:#8a7bb0;fill-opacity:.22;stroke:none}
.measured{fill:none;stroke:#1d2a35;stroke-width:1.2}.predicted{fill:none;stroke:#3d6a8f;stroke-width:1.2;stroke-dasharray:5 3}
.wline{fill:none;stroke:#7a4e12;stroke-width:1.1}.pline{fill:none;stroke:#2f5d50;stroke-width:1.1}.lline{fill:none;stroke:#4b3d78;stroke-width:1.2}
.critical{stroke:#c4161c;stroke-width:1;stroke-dasharray:6 3}.critical-label{fill:#c4161c}
.key{stroke:none}.key.measured{fill:#1d2a35}.key.predicted{fill:#3d6a8f}.key.band{fill:#7890a6;fill-opacity:.5}.key.wline{fill:#7a4e12}
.key.pline{fill:#2f5d50}.key.lline{fill:#4b3d78}.key.band-sd{fill:#8a7bb0;fill-opacity:.5}.key.critical{fill:#c4161c}
.alarm{fill:#c4161c}.reject{fill:#de9f2c}.row-label{fill:#1d2a35}.note{fill:#66727d}
.sizes-note{color:#55616c}.adapted{color:#2f5d50}.load-shift{color:#8a4b00}
tr.raised td:nth-child(2){color:#b3141c;font-weight:bold}`

// writeHTML writes the self-contained report page. The markup is also
// well-formed XML, so it can be checked with an XML parser.
func writeHTML(buf *bytes.Buffer, r *Report, sum *epochSummary) error {
	var sb strings.Builder
	title := r.Title
	if title == "" {
		title = r.Structure
	}
	tr := sum.tr
	sb.WriteString("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n")
	fmt.Fprintf(&sb, "<title>Replay report: %s</title>\n<style>\n%s\n</style>\n</head>\n<body>\n", esc(title), css+fatigueStyle(r))
	fmt.Fprintf(&sb, "<header id=\"header\">\n<h1>Replay report: %s</h1>\n", esc(title))
	fmt.Fprintf(&sb, "<p class=\"meta\">Structure <code>%s</code>; period %s to %s (UTC); %d epochs; model version <code id=\"model-version\">%s</code>.</p>\n",
		esc(r.Structure), esc(timeText(time.Unix(0, tr.t0))), esc(timeText(time.Unix(0, tr.t1))), sum.n, esc(r.ModelVersion))
	sb.WriteString("</header>\n")
	fmt.Fprintf(&sb, "<p class=\"caution\" id=\"caution\">%s</p>\n", esc(r.caution()))

	writeSummary(&sb, r, sum)
	writeTimeline(&sb, r, sum)
	writeEventTable(&sb, r)
	writeFitPlot(&sb, r, sum)
	writeLoadPlots(&sb, r, sum)
	writeMemberTotals(&sb, r)
	writeMemberPlots(&sb, r, sum)
	writeFatigue(&sb, r)

	sb.WriteString("<footer id=\"footer\">\n<h2>Data and model</h2>\n")
	fmt.Fprintf(&sb, "<p>Every epoch is in <a href=\"%s\">%s</a> and every event in <a href=\"%s\">%s</a>. Plots reduce long periods to the minimum and maximum per pixel column; the CSV files keep every value. Model version used: <code>%s</code>. The acceptance band is the predicted force ± k times the standard deviation of the residual, k = %s (critical value of Baarda's w-test); the global test is the chi-square test at alpha = %s.</p>\n",
		EpochsFile, EpochsFile, EventsFile, EventsFile, esc(r.ModelVersion), esc(num(r.CriticalValue, 2)), esc(floatText(r.Alpha)))
	fmt.Fprintf(&sb, "<p class=\"caution\">%s</p>\n</footer>\n</body>\n</html>\n", esc(r.caution()))
	buf.WriteString(sb.String())
	return nil
}

func writeSummary(sb *strings.Builder, r *Report, sum *epochSummary) {
	rejected := sum.rejected
	raised := 0
	for _, e := range r.Events {
		if e.Kind == alerts.Raised {
			raised++
		}
	}
	sb.WriteString("<section id=\"summary\">\n<h2>Summary</h2>\n<table id=\"summary-table\">\n<tbody>\n")
	share := 0.0
	if sum.n > 0 {
		share = 100 * float64(rejected) / float64(sum.n)
	}
	fmt.Fprintf(sb, "<tr><th>epochs</th><td class=\"num\">%d</td></tr>\n", sum.n)
	fmt.Fprintf(sb, "<tr><th>epochs rejected by the global test</th><td class=\"num\">%d (%s %%)</td></tr>\n", rejected, num(share, 2))
	fmt.Fprintf(sb, "<tr><th>alarms raised</th><td class=\"num\">%d</td></tr>\n", raised)
	sb.WriteString("</tbody>\n</table>\n")
	sb.WriteString("<table id=\"member-summary\">\n<thead><tr><th>member</th><th>epochs measured</th><th>epochs checkable</th><th>largest |w|</th><th>epochs with |w| above k</th></tr></thead>\n<tbody>\n")
	for i, m := range r.Members {
		mf := sum.members[i]
		present, checkable, over, maxW := mf.present, mf.checkable, mf.over, mf.maxW
		fmt.Fprintf(sb, "<tr data-member=\"%s\"><td>%s</td><td class=\"num\">%d</td><td class=\"num\">%d</td><td class=\"num\">%s</td><td class=\"num\">%d</td></tr>\n",
			esc(m), esc(m), present, checkable, num(maxW, 2), over)
	}
	sb.WriteString("</tbody>\n</table>\n</section>\n")
}

// interval is one active alarm, from raised to cleared (or the period end).
type interval struct{ from, to int64 }

// alarmRows derives the active intervals per rule and subject from the
// events, in order of first appearance.
func alarmRows(r *Report, tr timeRange) (keys []string, rows map[string][]interval) {
	evs := append([]Event(nil), r.Events...)
	sort.SliceStable(evs, func(i, j int) bool { return evs[i].Time.Before(evs[j].Time) })
	rows = map[string][]interval{}
	open := map[string]int64{}
	for _, e := range evs {
		k := string(e.Rule) + ": " + e.Subject
		if _, ok := rows[k]; !ok {
			rows[k] = nil
			keys = append(keys, k)
		}
		t := e.Time.UnixNano()
		switch e.Kind {
		case alerts.Raised:
			if _, ok := open[k]; !ok {
				open[k] = t
			}
		case alerts.Cleared:
			if from, ok := open[k]; ok {
				rows[k] = append(rows[k], interval{from, t})
				delete(open, k)
			}
		}
	}
	for _, k := range keys {
		if from, ok := open[k]; ok {
			rows[k] = append(rows[k], interval{from, max(tr.t1, from)})
		}
	}
	return keys, rows
}

func writeTimeline(sb *strings.Builder, r *Report, sum *epochSummary) {
	tr := sum.tr
	keys, rows := alarmRows(r, tr)
	const rowH = 28
	h := float64(padT + padB + rowH*(len(keys)+1))
	f := frame{t0: tr.t0, t1: tr.t1, y0: 0, y1: 1, h: h}
	sb.WriteString("<section id=\"timeline\">\n<h2>Alarm timeline</h2>\n")
	sb.WriteString("<p>Active alarms per rule and subject (from raised to cleared), and the epochs the global test rejected.</p>\n")
	fmt.Fprintf(sb, `<svg id="alarm-timeline" class="plot" width="%d" height="%d" viewBox="0 0 %d %d" role="img" aria-label="alarm timeline" xmlns="http://www.w3.org/2000/svg">`+"\n",
		plotW, int(h), plotW, int(h))
	bottom := h - padB
	tt, layout := timeTicks(tr.t0, tr.t1)
	for _, t := range tt {
		x := px(f.x(t))
		fmt.Fprintf(sb, `<line class="grid" x1="%s" x2="%s" y1="%d" y2="%s"/><text x="%s" y="%s" text-anchor="%s">%s</text>`+"\n",
			x, x, padT, px(bottom), x, px(bottom+16), tickAnchor(f.x(t)), time.Unix(0, t).UTC().Format(layout))
	}
	// row 0: global test rejections; each rejected epoch covers one epoch
	// interval, and runs closer than a pixel are merged.
	y := padT
	fmt.Fprintf(sb, `<text class="row-label" x="%d" y="%d">global test rejected</text>`+"\n", padL+4, y+10)
	for _, iv := range sum.rejectedIntervals(f) {
		x0 := math.Max(f.x(iv.from), padL)
		x1 := math.Min(f.x(iv.to), plotW-padR)
		fmt.Fprintf(sb, `<rect class="reject" x="%s" y="%d" width="%s" height="%d"/>`+"\n", px(x0), y+13, px(math.Max(x1-x0, 1)), rowH-16)
	}
	for i, k := range keys {
		y := padT + rowH*(i+1)
		fmt.Fprintf(sb, `<g data-row="%s"><text class="row-label" x="%d" y="%d">%s</text>`, esc(k), padL+4, y+10, esc(k))
		for _, iv := range rows[k] {
			x0 := math.Max(f.x(iv.from), padL)
			x1 := math.Min(f.x(iv.to), plotW-padR)
			if x1 < x0+1 {
				x1 = x0 + 1
			}
			fmt.Fprintf(sb, `<rect class="alarm" x="%s" y="%d" width="%s" height="%d"/>`, px(x0), y+13, px(x1-x0), rowH-16)
		}
		sb.WriteString("</g>\n")
	}
	if len(keys) == 0 {
		fmt.Fprintf(sb, `<text class="note" x="%d" y="%d">no alarm events in this period</text>`+"\n", padL+4, padT+rowH+13)
	}
	sb.WriteString("</svg>\n</section>\n")
}

func writeEventTable(sb *strings.Builder, r *Report) {
	sb.WriteString("<section id=\"events\">\n<h2>Events</h2>\n")
	sb.WriteString("<table id=\"event-table\">\n<thead><tr><th>time (UTC)</th><th>kind</th><th>rule</th><th>subject</th><th>w</th><th>estimated size</th><th>ranked causes (test statistic T, estimated size)</th></tr></thead>\n<tbody>\n")
	if len(r.Events) == 0 {
		sb.WriteString("<tr><td colspan=\"7\">no events in this period</td></tr>\n")
	}
	for _, e := range r.Events {
		fmt.Fprintf(sb, "<tr class=\"%s\" data-subject=\"%s\"><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td class=\"num\">%s</td><td class=\"num\">%s</td><td>",
			esc(idPart(string(e.Kind))), esc(e.Subject), esc(timeText(e.Time)), esc(string(e.Kind)), esc(string(e.Rule)), esc(e.Subject), num(e.W, 2), esc(sizeText(e.Size, e.SizeUnit)))
		if e.Message != "" {
			fmt.Fprintf(sb, "%s", esc(e.Message))
		}
		if len(e.Causes) > 0 {
			if !e.CausesAt.IsZero() && !e.CausesAt.Equal(e.Time) {
				fmt.Fprintf(sb, "<div class=\"sizes-note\">sizes over the epochs since the fault began, as of %s</div>", esc(timeText(e.CausesAt)))
			}
			sb.WriteString("<ol>")
			for _, c := range alerts.ShownCauses(e.Causes) {
				fmt.Fprintf(sb, "<li>%s</li>", esc(alerts.CauseText(c)))
			}
			sb.WriteString("</ol>")
		}
		if len(e.Adapted) > 0 {
			var hs []string
			for _, h := range e.Adapted {
				hs = append(hs, alerts.CauseText(h))
			}
			fmt.Fprintf(sb, "<div class=\"adapted\">carried in the adapted fit: %s</div>", esc(strings.Join(hs, "; ")))
		}
		for _, l := range e.LoadShifts {
			fmt.Fprintf(sb, "<div class=\"load-shift\">unknown load %s left its recent distribution when the alarm rose: %s against %s ± %s (z = %s); it may be absorbing the fault</div>",
				esc(l.Pattern), esc(sizeText(l.Value, l.Unit)), esc(sizeText(l.Mean, l.Unit)), esc(sizeText(l.StdDev, l.Unit)), num(l.Z, 1))
		}
		sb.WriteString("</td></tr>\n")
	}
	sb.WriteString("</tbody>\n</table>\n</section>\n")
}

// pFloor is the smallest p-value drawn; smaller ones are drawn at it.
const pFloor = 1e-30

func writeFitPlot(sb *strings.Builder, r *Report, sum *epochSummary) {
	tr := sum.tr
	sb.WriteString("<section id=\"fit\">\n<h2>Global test</h2>\n")
	fmt.Fprintf(sb, "<p>p-value of the chi-square test of every epoch, log scale, with the significance level alpha = %s. p-values below %s are drawn at %s.</p>\n",
		esc(floatText(r.Alpha)), floatText(pFloor), floatText(pFloor))
	env := sum.fit
	lo, _, ok := limits(env)
	if !ok {
		lo = -4
	}
	if r.Alpha > 0 {
		lo = math.Min(lo, math.Log10(r.Alpha))
	}
	lo = math.Floor(lo) - 0.5
	f := frame{t0: tr.t0, t1: tr.t1, y0: lo, y1: 0.2, h: plotH}
	var ticks []float64
	step := math.Max(1, math.Ceil(-lo/6))
	for v := 0.0; v >= lo; v -= step {
		ticks = append(ticks, v)
	}
	p := openPlot(sb, "fit-pvalue", "p-value of the global test", f, ticks, func(v float64) string {
		if v == 0 {
			return "1"
		}
		return "1e" + strconv.Itoa(int(v))
	}, "p-value")
	p.path("pline", linePath(f, env, tr.maxGap))
	if r.Alpha > 0 {
		p.hline("critical", math.Log10(r.Alpha), "alpha = "+floatText(r.Alpha))
	}
	p.legend([2]string{"pline", "p-value"}, [2]string{"critical", "alpha"})
	p.close()
	sb.WriteString("</section>\n")
}

func writeLoadPlots(sb *strings.Builder, r *Report, sum *epochSummary) {
	tr := sum.tr
	sb.WriteString("<section id=\"loads\">\n<h2>Estimated unknown loads</h2>\n")
	if len(r.Patterns) == 0 {
		sb.WriteString("<p>No unknown load magnitudes were estimated.</p>\n</section>\n")
		return
	}
	sb.WriteString("<p>Estimated magnitude of each unknown load pattern with ± one standard deviation.</p>\n")
	for j, pat := range r.Patterns {
		val, low, high := sum.loads[j].val, sum.loads[j].low, sum.loads[j].high
		lo, hi, ok := limits(val, low, high)
		if !ok {
			lo, hi = 0, 1
		}
		lo, hi = padded(lo, hi)
		f := frame{t0: tr.t0, t1: tr.t1, y0: lo, y1: hi, h: plotH}
		unit := pat.Unit
		if unit == "" {
			unit = "1"
		}
		fmt.Fprintf(sb, "<h3>%s</h3>\n", esc(pat.Name))
		if pat.Reference > 0 {
			fmt.Fprintf(sb, "<p>In %s: the pattern factor times the pattern's reference load of %s %s.</p>\n", esc(unit), esc(strconv.FormatFloat(pat.Reference, 'g', -1, 64)), esc(unit))
		} else if unit == "1" {
			sb.WriteString("<p>As a pattern factor (a multiple of the pattern as defined in the structure file, which gives no reference load).</p>\n")
		}
		p := openPlot(sb, "load-"+idPart(pat.Name), "estimated load "+pat.Name, f, valueTicks(lo, hi),
			func(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }, pat.Name+" ("+unit+")")
		p.polygons("band-sd", bandPolygons(f, low, high, tr.maxGap))
		p.path("lline", linePath(f, val, tr.maxGap))
		p.legend([2]string{"lline", "estimate"}, [2]string{"band-sd", "± 1 std. dev."})
		if !ok {
			p.note("not estimated in this period")
		}
		p.close()
	}
	sb.WriteString("</section>\n")
}

func writeMemberPlots(sb *strings.Builder, r *Report, sum *epochSummary) {
	tr := sum.tr
	sb.WriteString("<section id=\"members\">\n<h2>Gauged members</h2>\n")
	fmt.Fprintf(sb, "<p>Measured and predicted change of the axial force since the gauges were zeroed (tension positive; the total force is in the table above) with the acceptance band, predicted ± %s σ of the residual; below it Baarda's w with the critical value ± %s. Epochs where the member cannot be checked are left out of the w plot.</p>\n",
		num(r.CriticalValue, 2), num(r.CriticalValue, 2))
	k := r.CriticalValue
	for i, m := range r.Members {
		me := sum.force[i]
		meas, pred, bandLo, bandHi, w := me.meas, me.pred, me.bandLo, me.bandHi, me.w

		fmt.Fprintf(sb, "<div class=\"member\" id=\"member-%s\" data-member=\"%s\">\n<h3>Member %s</h3>\n", idPart(m), esc(m), esc(m))
		lo, hi, ok := limits(meas, pred, bandLo, bandHi)
		if !ok {
			lo, hi = -1000, 1000
		}
		lo, hi = padded(lo, hi)
		f := frame{t0: tr.t0, t1: tr.t1, y0: lo, y1: hi, h: plotH}
		dec := 1
		if hi-lo < 5000 {
			dec = 2
		}
		p := openPlot(sb, "force-"+idPart(m), "force in member "+m, f, valueTicks(lo, hi),
			func(v float64) string { return strconv.FormatFloat(v/1000, 'f', dec, 64) }, "change since zeroing (kN)")
		p.polygons("band", bandPolygons(f, bandLo, bandHi, tr.maxGap))
		p.path("predicted", linePath(f, pred, tr.maxGap))
		p.path("measured", linePath(f, meas, tr.maxGap))
		p.legend([2]string{"measured", "measured"}, [2]string{"predicted", "predicted"}, [2]string{"band", "acceptance band"})
		if !ok {
			p.note("no readings in this period")
		}
		p.close()

		wlo, whi, wok := limits(w)
		ext := 1.2 * k
		if wok {
			ext = math.Max(ext, 1.05*math.Max(math.Abs(wlo), math.Abs(whi)))
		}
		fw := frame{t0: tr.t0, t1: tr.t1, y0: -ext, y1: ext, h: plotH * 0.8}
		p = openPlot(sb, "w-"+idPart(m), "w statistic of member "+m, fw, valueTicks(-ext, ext),
			func(v float64) string { return strconv.FormatFloat(v, 'g', 3, 64) }, "w")
		p.path("wline", linePath(fw, w, tr.maxGap))
		p.hline("critical", k, "+k = "+num(k, 2))
		p.hline("critical", -k, "−k")
		p.legend([2]string{"wline", "w"}, [2]string{"critical", "critical value"})
		if !wok {
			p.note("not checkable in this period")
		}
		p.close()
		sb.WriteString("</div>\n")
	}
	sb.WriteString("</section>\n")
}
