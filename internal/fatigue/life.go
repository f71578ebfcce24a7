package fatigue

import (
	"math"
	"time"
)

// HourHistogram is the histogram of one hour (Hour is its start).
type HourHistogram struct {
	Hour time.Time
	Hist *Histogram
}

// DayDamage is the Miner damage and the cycles counted in one UTC day.
type DayDamage struct {
	Day    time.Time
	Cycles float64
	Damage float64
}

// Life is the damage a gauge's detail accumulated over a period and the
// projection of its remaining life. It is a monitoring estimate (see
// Caution).
type Life struct {
	// Start is when accumulation starts (the later of the period's start
	// and the gauge's declared start).
	Start time.Time
	// Days are the damage per UTC day from Start, in order, including
	// days without cycles inside the period.
	Days []DayDamage
	// Total is the damage in the days listed (Miner's sum over the period).
	Total float64
	// Cycles is the number of cycles counted in the days listed.
	Cycles float64
	// Accumulated is the damage since the gauge's declared start (or its
	// first hour) up to the period's end: D in the projection.
	Accumulated float64
	// WindowDays is the span (days) before the period's end the daily rate
	// is averaged over: RateWindowDays, or less when accumulation started
	// later.
	WindowDays float64
	// RatePerDay is the damage in the window divided by its span in days.
	RatePerDay float64
	// RemainingYears is (1 - Accumulated) / RatePerDay in years of 365.25
	// days: +Inf when the rate is zero, 0 when Accumulated >= 1.
	RemainingYears float64
}

// RateWindowDays is how many of the last days the recent daily rate of
// damage averages (common practice: long enough to span a week's traffic
// pattern, short enough to follow a change in use).
const RateWindowDays = 7

// Summarise computes, from hourly histograms on curve c, the damage per UTC
// day of the hours starting in [from, to) and not before start; the damage
// accumulated from start (zero: every hour given) to the end; the daily rate
// over the last RateWindowDays of the period; and the projected remaining
// life.
func Summarise(c Curve, hours []HourHistogram, start, from, to time.Time) Life {
	begin := from
	if start.After(begin) {
		begin = start
	}
	var l Life
	l.Start = begin
	if !to.After(begin) {
		for _, h := range hours {
			if !h.Hour.Before(start) && h.Hour.Before(to) {
				l.Accumulated += c.HistogramDamage(h.Hist)
			}
		}
		l.RemainingYears = RemainingYears(l.Accumulated, 0)
		return l
	}
	dayOf := func(t time.Time) time.Time {
		t = t.UTC()
		return time.Date(t.Year(), t.Month(), t.Day(), 0, 0, 0, 0, time.UTC)
	}
	first := dayOf(begin)
	last := dayOf(to.Add(-time.Nanosecond))
	for d := first; !d.After(last); d = d.AddDate(0, 0, 1) {
		l.Days = append(l.Days, DayDamage{Day: d})
	}
	winStart := to.Add(-RateWindowDays * 24 * time.Hour)
	if winStart.Before(begin) {
		winStart = begin
	}
	var inWindow float64
	for _, h := range hours {
		if h.Hour.Before(start) || !h.Hour.Before(to) {
			continue
		}
		if h.Hour.Before(begin) {
			l.Accumulated += c.HistogramDamage(h.Hist)
			continue
		}
		i := int(dayOf(h.Hour).Sub(first).Hours() / 24)
		if i < 0 || i >= len(l.Days) {
			continue
		}
		dmg := c.HistogramDamage(h.Hist)
		n := h.Hist.Cycles()
		l.Days[i].Damage += dmg
		l.Days[i].Cycles += n
		if !h.Hour.Before(winStart) {
			inWindow += dmg
		}
	}
	for _, d := range l.Days {
		l.Total += d.Damage
		l.Cycles += d.Cycles
	}
	l.Accumulated += l.Total
	l.WindowDays = to.Sub(winStart).Hours() / 24
	l.RatePerDay = inWindow / l.WindowDays
	l.RemainingYears = RemainingYears(l.Accumulated, l.RatePerDay)
	return l
}

// RemainingYears is the time to Miner's sum of 1 at a constant daily rate:
// (1 - D) / rate days, in years of 365.25 days; +Inf at a zero rate, 0 once
// D >= 1.
func RemainingYears(total, ratePerDay float64) float64 {
	if total >= 1 {
		return 0
	}
	if !(ratePerDay > 0) {
		return math.Inf(1)
	}
	return (1 - total) / ratePerDay / 365.25
}
