package report

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// Plot geometry in SVG user units (pixels at 100 % zoom).
const (
	plotW  = 900
	plotH  = 220
	padL   = 72
	padR   = 16
	padT   = 14
	padB   = 30
	plotCs = plotW - padL - padR // pixel columns = reduction buckets
)

// frame maps time and value to SVG coordinates.
type frame struct {
	t0, t1 int64 // unix nanoseconds
	y0, y1 float64
	h      float64 // plot height
}

func (f frame) x(t int64) float64 {
	return padL + float64(plotCs)*float64(t-f.t0)/float64(f.t1-f.t0)
}

func (f frame) y(v float64) float64 {
	return padT + (f.h-padT-padB)*(f.y1-v)/(f.y1-f.y0)
}

// px formats an SVG coordinate with one decimal.
func px(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

// bucket is the reduction of the epochs falling into one pixel column:
// the minimum and maximum value and the first and last time.
type bucket struct {
	lo, hi      float64
	first, last int64
	n           int
}

// envelope holds one bucket per pixel column (min/max decimation).
type envelope []bucket

// timeRange is the period drawn on the x axis, with the largest gap between
// epochs still drawn as a connected line.
type timeRange struct {
	t0, t1 int64
	maxGap int64
	// step is the median interval between epochs (0 with fewer than two).
	step int64
}

// periodRange takes the period drawn from the report's From and To, or
// when they do not give one from its epochs' first and last time. The
// step and gap threshold are set by setStep once the epochs are seen.
func periodRange(r *Report) timeRange {
	var tr timeRange
	switch {
	case !r.From.IsZero() && r.To.After(r.From):
		tr.t0, tr.t1 = r.From.UnixNano(), r.To.UnixNano()
	case len(r.Epochs) > 0:
		tr.t0, tr.t1 = r.Epochs[0].Time.UnixNano(), r.Epochs[len(r.Epochs)-1].Time.UnixNano()
	}
	if tr.t1 <= tr.t0 {
		tr.t0 -= int64(time.Second)
		tr.t1 = tr.t0 + 2*int64(time.Second)
	}
	return tr
}

// setStep sets the median interval between epochs (0: fewer than two
// epochs) and the gap threshold: five times the median interval, at least
// two pixel columns.
func (tr *timeRange) setStep(median int64) {
	tr.step, tr.maxGap = median, 5*median
	if col := (tr.t1 - tr.t0) / plotCs; tr.maxGap < 2*col {
		tr.maxGap = 2 * col
	}
}

func (tr timeRange) column(t int64) int {
	c := int(float64(t-tr.t0) * plotCs / float64(tr.t1-tr.t0))
	return min(max(c, 0), plotCs-1)
}

// limits returns the smallest and largest value of the envelopes.
func limits(envs ...envelope) (lo, hi float64, ok bool) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, env := range envs {
		for _, b := range env {
			if b.n > 0 {
				lo, hi, ok = math.Min(lo, b.lo), math.Max(hi, b.hi), true
			}
		}
	}
	return lo, hi, ok
}

// runs calls f for each run of consecutive non-empty buckets not separated
// by more than maxGap, with the bucket indices of the run.
func runs(env envelope, maxGap int64, f func(idx []int)) {
	var cur []int
	last := int64(0)
	for i, b := range env {
		if b.n == 0 {
			continue
		}
		if len(cur) > 0 && b.first-last > maxGap {
			f(cur)
			cur = nil
		}
		cur = append(cur, i)
		last = b.last
	}
	if len(cur) > 0 {
		f(cur)
	}
}

// bucketX is the x position of a bucket: its mean time, which is the
// epoch's own time when it holds one epoch.
func bucketX(f frame, b bucket) float64 { return f.x(b.first/2 + b.last/2 + (b.first%2+b.last%2)/2) }

// linePath draws the envelope as a polyline through each bucket's minimum
// and maximum (one point when they agree), lifting the pen across gaps.
func linePath(f frame, env envelope, maxGap int64) string {
	var sb strings.Builder
	runs(env, maxGap, func(idx []int) {
		for k, i := range idx {
			b := env[i]
			x := px(bucketX(f, b))
			cmd := "L"
			if k == 0 {
				cmd = "M"
			}
			sb.WriteString(cmd + x + "," + px(f.y(b.lo)))
			if b.hi != b.lo {
				sb.WriteString("L" + x + "," + px(f.y(b.hi)))
			}
		}
	})
	return sb.String()
}

// bandPolygons draws the area between the low envelope's minimum and the
// high envelope's maximum, one polygon per run.
func bandPolygons(f frame, low, high envelope, maxGap int64) []string {
	both := make(envelope, len(low))
	for i := range low {
		if low[i].n > 0 && high[i].n > 0 {
			both[i] = bucket{lo: low[i].lo, hi: high[i].hi, first: low[i].first, last: low[i].last, n: 1}
		}
	}
	var out []string
	runs(both, maxGap, func(idx []int) {
		pts := make([]string, 0, 2*len(idx)+2)
		for _, i := range idx {
			pts = append(pts, px(bucketX(f, both[i]))+","+px(f.y(both[i].hi)))
		}
		for k := len(idx) - 1; k >= 0; k-- {
			b := both[idx[k]]
			pts = append(pts, px(bucketX(f, b))+","+px(f.y(b.lo)))
		}
		if len(idx) == 1 { // a single column: give it one pixel of width
			x := bucketX(f, both[idx[0]])
			pts = []string{px(x-0.5) + "," + px(f.y(both[idx[0]].hi)), px(x+0.5) + "," + px(f.y(both[idx[0]].hi)),
				px(x+0.5) + "," + px(f.y(both[idx[0]].lo)), px(x-0.5) + "," + px(f.y(both[idx[0]].lo))}
		}
		out = append(out, strings.Join(pts, " "))
	})
	return out
}

// niceStep returns a step of 1, 2 or 5 times a power of ten giving about n
// intervals over span.
func niceStep(span float64, n int) float64 {
	raw := span / float64(n)
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= raw {
			return m * p
		}
	}
	return 10 * p
}

// valueTicks returns the tick values of a linear axis over [lo, hi].
func valueTicks(lo, hi float64) []float64 {
	step := niceStep(hi-lo, 5)
	var out []float64
	for v := math.Ceil(lo/step) * step; v <= hi+1e-9*step; v += step {
		if math.Abs(v) < 1e-12*step {
			v = 0
		}
		out = append(out, v)
	}
	return out
}

var timeSteps = []time.Duration{
	time.Second, 2 * time.Second, 5 * time.Second, 10 * time.Second, 15 * time.Second, 30 * time.Second,
	time.Minute, 2 * time.Minute, 5 * time.Minute, 10 * time.Minute, 15 * time.Minute, 30 * time.Minute,
	time.Hour, 2 * time.Hour, 3 * time.Hour, 6 * time.Hour, 12 * time.Hour, 24 * time.Hour, 48 * time.Hour, 7 * 24 * time.Hour,
}

// timeTicks returns about six tick times (UTC, on round values) and their
// label layout.
func timeTicks(t0, t1 int64) ([]int64, string) {
	span := time.Duration(t1 - t0)
	step := timeSteps[len(timeSteps)-1]
	for _, s := range timeSteps {
		if span/s <= 7 {
			step = s
			break
		}
	}
	layout := "15:04:05"
	switch {
	case span > 48*time.Hour:
		layout = "01-02 15:04"
	case step >= time.Minute:
		layout = "15:04"
	}
	first := (t0 + int64(step) - 1) / int64(step) * int64(step)
	var out []int64
	for t := first; t <= t1; t += int64(step) {
		out = append(out, t)
	}
	return out, layout
}

// svgPlot writes an SVG element with axes, grid and the given body.
type svgPlot struct {
	sb    *strings.Builder
	f     frame
	ticks []float64
	label func(float64) string
}

func openPlot(sb *strings.Builder, id, aria string, f frame, ticks []float64, label func(float64) string, yTitle string) *svgPlot {
	p := &svgPlot{sb: sb, f: f, ticks: ticks, label: label}
	fmt.Fprintf(sb, `<svg id="%s" class="plot" width="%d" height="%d" viewBox="0 0 %d %d" role="img" aria-label="%s" xmlns="http://www.w3.org/2000/svg">`+"\n",
		esc(id), plotW, int(f.h), plotW, int(f.h), esc(aria))
	sb.WriteString(`<g class="axes">`)
	bottom := f.h - padB
	for _, v := range ticks {
		y := px(f.y(v))
		fmt.Fprintf(sb, `<line class="grid" x1="%d" x2="%d" y1="%s" y2="%s"/>`, padL, plotW-padR, y, y)
		fmt.Fprintf(sb, `<text x="%d" y="%s" text-anchor="end">%s</text>`, padL-6, px(f.y(v)+4), esc(label(v)))
	}
	tt, layout := timeTicks(f.t0, f.t1)
	for _, t := range tt {
		x := px(f.x(t))
		fmt.Fprintf(sb, `<line class="tick" x1="%s" x2="%s" y1="%s" y2="%s"/>`, x, x, px(bottom), px(bottom+4))
		fmt.Fprintf(sb, `<text x="%s" y="%s" text-anchor="%s">%s</text>`, x, px(bottom+16), tickAnchor(f.x(t)), time.Unix(0, t).UTC().Format(layout))
	}
	fmt.Fprintf(sb, `<line class="axis" x1="%d" x2="%d" y1="%d" y2="%s"/>`, padL, padL, padT, px(bottom))
	fmt.Fprintf(sb, `<line class="axis" x1="%d" x2="%d" y1="%s" y2="%s"/>`, padL, plotW-padR, px(bottom), px(bottom))
	mid := (padT + bottom) / 2
	fmt.Fprintf(sb, `<text x="14" y="%s" text-anchor="middle" transform="rotate(-90 14 %s)">%s</text>`, px(mid), px(mid), esc(yTitle))
	sb.WriteString("</g>\n")
	return p
}

func (p *svgPlot) path(class, d string) {
	if d == "" {
		return
	}
	fmt.Fprintf(p.sb, `<path class="%s" d="%s"/>`+"\n", class, d)
}

func (p *svgPlot) polygons(class string, polys []string) {
	for _, pts := range polys {
		fmt.Fprintf(p.sb, `<polygon class="%s" points="%s"/>`+"\n", class, pts)
	}
}

// hline draws a horizontal reference line at value v with a label.
func (p *svgPlot) hline(class string, v float64, text string) {
	if v < p.f.y0 || v > p.f.y1 {
		return
	}
	y := px(p.f.y(v))
	fmt.Fprintf(p.sb, `<line class="%s" x1="%d" x2="%d" y1="%s" y2="%s"/>`, class, padL, plotW-padR, y, y)
	if text != "" {
		fmt.Fprintf(p.sb, `<text class="%s-label" x="%d" y="%s" text-anchor="end">%s</text>`, class, plotW-padR-4, px(p.f.y(v)-3), esc(text))
	}
	p.sb.WriteString("\n")
}

func (p *svgPlot) legend(items ...[2]string) {
	x := padL + 8
	for _, it := range items {
		fmt.Fprintf(p.sb, `<rect class="key %s" x="%d" y="%d" width="18" height="4"/><text class="key-label" x="%d" y="%d">%s</text>`,
			it[0], x, 4, x+22, 10, esc(it[1]))
		x += 30 + 7*len(it[1])
	}
	p.sb.WriteString("\n")
}

func (p *svgPlot) note(text string) {
	fmt.Fprintf(p.sb, `<text class="note" x="%d" y="%d">%s</text>`+"\n", padL+4, padT+12, esc(text))
}

func (p *svgPlot) close() { p.sb.WriteString("</svg>\n") }

// padded widens [lo, hi] by 5 % on each side (1 unit when empty).
func padded(lo, hi float64) (float64, float64) {
	if hi <= lo {
		d := math.Max(math.Abs(lo)*0.05, 1)
		return lo - d, hi + d
	}
	m := 0.05 * (hi - lo)
	return lo - m, hi + m
}

// tickAnchor keeps time labels near the right edge inside the plot.
func tickAnchor(x float64) string {
	if x > plotW-padR-24 {
		return "end"
	}
	return "middle"
}
