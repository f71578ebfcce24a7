package dashboard

import (
	"context"
	"math"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"trussmonitor/internal/dashboard/browsertest"
)

// TestBrowserFatiguePanel: with fatigue gauges the panel appears with the
// fatigue caution, one row per gauge and the daily bars; without them it
// stays hidden.
func TestBrowserFatiguePanel(t *testing.T) {
	ctx, stop := browsertest.NewBrowser(t)
	defer stop()
	src := newMemSource()
	src.addEpoch(t0, "", 0)
	day := time.Date(2026, 6, 14, 0, 0, 0, 0, time.UTC)
	fat := memFatigue{
		{Gauge: "B4_a", CategoryMPa: 71, GammaFf: 1, GammaMf: 1.15, Start: day.AddDate(0, -5, 0), DamageTotal: 2.5e-4, RatePerDay: 3.5e-6, WindowDays: 7,
			RemainingYears: 782.4, LastSample: t0, Days: []FatigueDay{{Day: day.AddDate(0, 0, -1), Cycles: 700000, Damage: 3e-6}, {Day: day, Cycles: 710000, Damage: 4e-6}}},
		{Gauge: "D1_a", CategoryMPa: 56, GammaFf: 1, GammaMf: 1.35, RemainingYears: math.Inf(1)},
	}
	for _, c := range []struct {
		name  string
		opts  Options
		shown bool
	}{{"with gauges", Options{Fatigue: fat}, true}, {"without", Options{}, false}} {
		srv := httptest.NewServer(New(src, c.opts))
		nav, cancel := context.WithTimeout(ctx, 20*time.Second)
		if err := chromedp.Do(nav, chromedp.Navigate(srv.URL+"/?poll=300")); err != nil {
			cancel()
			t.Fatalf("%s: opening %s: %v", c.name, srv.URL, err)
		}
		cancel()
		browsertest.WaitJS(t, ctx, 20*time.Second, "structure list", `document.getElementById('structure-select').value !== ''`)
		if !c.shown {
			browsertest.WaitJS(t, ctx, 20*time.Second, "fatigue refresh", `performance.getEntriesByType('resource').some(e => e.name.includes('/fatigue'))`)
			if vis := browsertest.EvalJS[bool](t, ctx, `!document.getElementById('fatigue-panel').hidden`); vis {
				t.Errorf("%s: fatigue panel shown", c.name)
			}
			srv.Close()
			continue
		}
		browsertest.WaitJS(t, ctx, 20*time.Second, "fatigue rows", `document.querySelectorAll('#fatigue tbody tr').length === 2`)
		if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('fatigue-caution').textContent`); !strings.Contains(s, "not a design check or an assessment") || !strings.Contains(s, "licensed engineer") {
			t.Errorf("fatigue caution %q", s)
		}
		if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#fatigue tr[data-gauge="B4_a"]').textContent`); !strings.Contains(s, "2.50e-4") || !strings.Contains(s, "782.4 years") || !strings.Contains(s, "71 MPa") {
			t.Errorf("B4_a row %q", s)
		}
		if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#fatigue tr[data-gauge="D1_a"]').textContent`); !strings.Contains(s, "no damage at the recent rate") || !strings.Contains(s, "first reading") {
			t.Errorf("D1_a row %q", s)
		}
		if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#fatigue tr[data-gauge="B4_a"] rect.fatigue-bar').length`); n != 2 {
			t.Errorf("%d daily bars, want 2", n)
		}
		browsertest.SaveScreenshot(ctx, t, "dashboard-fatigue.png")
		srv.Close()
	}
}
