package dashboard

import (
	"context"
	"fmt"
	"math"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"trussmonitor/internal/dashboard/browsertest"
)

// totalsSource adds member totals, a design basis and a crowd load in kPa
// to the footbridge test source: member j has utilisation 0.05 + 0.9 j /
// (n - 1), so the last member (D6) is above the 0.90 warning level.
type totalsSource struct{ *memSource }

const testUtilCaution = "Utilisation is a monitoring estimate, not a design check or an assessment; assessment rests with a licensed engineer under local codes."

func (s totalsSource) State(name string) (State, error) {
	st, err := s.memSource.State(name)
	if err != nil || st.Epoch.IsZero() {
		return st, err
	}
	gauged := map[string]MemberState{}
	for _, g := range st.Gauged {
		gauged[g.ID] = g
	}
	const resistance = 500e3
	nm := len(st.Geometry.Members)
	st.Members = nil
	for j, m := range st.Geometry.Members {
		u := 0.05 + 0.9*float64(j)/float64(nm-1)
		if j == nm-1 {
			u = 0.96
		}
		total := -u * resistance // compression
		mt := MemberTotal{ID: m.ID, Gauged: m.Gauged, Resistance: resistance, Utilisation: u,
			MeasuredChange: math.NaN(), MeasuredTotal: math.NaN(), Ratio: math.NaN()}
		if g, ok := gauged[m.ID]; ok && !math.IsNaN(g.Measured) {
			// Consistent with the gauged entry: the change since zeroing is
			// its measured force, the zero state makes up the rest.
			mt.Measured = true
			mt.MeasuredChange, mt.PredictedChange = g.Measured, g.Predicted
			mt.ZeroState = total - g.Measured
			mt.MeasuredTotal, mt.Total = total, total
			mt.PredictedTotal = mt.ZeroState + g.Predicted
			mt.Ratio = mt.MeasuredTotal / mt.PredictedTotal
		} else {
			mt.PredictedChange = -2e3
			mt.ZeroState = total + 2e3
			mt.PredictedTotal, mt.Total = total, total
		}
		mt.Stress = mt.Total / 2.82e-3
		mt.PredictedUtilisation = math.Abs(mt.PredictedTotal) / resistance
		st.Members = append(st.Members, mt)
	}
	st.Design = &Design{Standard: "EN 1993-1-1", Caution: testUtilCaution}
	st.Loads = []LoadEstimate{{Pattern: "crowd", Value: 0.42, StdDev: 0.05, Unit: "kPa", Factor: 0.42, FactorStdDev: 0.05}}
	return st, nil
}

// TestBrowserUtilisation opens the page in the utilisation colour mode:
// every member is coloured by its utilisation, the one above 0.90 is drawn
// as a warning, the caution of the utilisation is on the page, the totals
// table lists every member with its change since zeroing and total, and the
// unknown load shows in kPa with the pattern factor beside.
func TestBrowserUtilisation(t *testing.T) {
	ctx, stop := browsertest.NewBrowser(t)
	defer stop()
	src := totalsSource{newMemSource()}
	for i := 0; i < 5; i++ {
		src.addEpoch(t0.Add(time.Duration(i)*time.Second), "", 0)
	}
	srv := httptest.NewServer(New(src, Options{}))
	defer srv.Close()
	nav, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	if err := chromedp.Do(nav, chromedp.Navigate(srv.URL+"/?poll=300&colour=utilisation")); err != nil {
		t.Fatalf("opening %s: %v", srv.URL, err)
	}
	geom := footbridgeGeometry()
	browsertest.WaitJS(t, ctx, 20*time.Second, "members coloured by utilisation",
		fmt.Sprintf(`document.querySelectorAll('#truss line[data-utilisation]').length === %d`, len(geom.Members)))
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('truss-heading').textContent`); !strings.Contains(s, "utilisation") {
		t.Errorf("heading in utilisation mode: %q", s)
	}
	last := geom.Members[len(geom.Members)-1].ID
	if s := browsertest.EvalJS[string](t, ctx, fmt.Sprintf(`document.querySelector('#truss line[data-member=%q]').getAttribute('data-state')`, last)); s != "utilisation-high" {
		t.Errorf("member %s (utilisation 0.96) state %q, want utilisation-high", last, s)
	}
	if c := browsertest.EvalJS[string](t, ctx, fmt.Sprintf(`document.querySelector('#truss line[data-member=%q]').getAttribute('stroke')`, last)); c != "rgb(92, 36, 128)" {
		t.Errorf("member %s colour %q, want the warning violet rgb(92, 36, 128)", last, c)
	}
	if s := browsertest.EvalJS[string](t, ctx, fmt.Sprintf(`document.querySelector('#truss line[data-member=%q]').getAttribute('stroke')`, geom.Members[0].ID)); s == "rgb(92, 36, 128)" || s == "rgb(196, 22, 28)" {
		t.Errorf("a lightly used member is drawn %q", s)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "totals table", fmt.Sprintf(`document.querySelectorAll('#totals tbody tr').length === %d`, len(geom.Members)))
	note := browsertest.EvalJS[string](t, ctx, `(function(){const e=document.getElementById('utilisation-caution'); return e.hidden ? '' : e.textContent})()`)
	if !strings.Contains(note, "not a design check or an assessment") || !strings.Contains(note, "licensed engineer under local codes") {
		t.Errorf("utilisation caution on the page: %q", note)
	}
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('legend').textContent`); !strings.Contains(s, "utilisation") || !strings.Contains(s, "monitoring estimate") {
		t.Errorf("legend in utilisation mode: %q", s)
	}
	if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#totals tbody tr').textContent`); !strings.Contains(s, last) || !strings.Contains(s, "kN") || !strings.Contains(s, "MPa") {
		t.Errorf("first totals row (highest utilisation first): %q", s)
	}
	if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#loads tr[data-pattern="crowd"]').textContent`); !strings.Contains(s, "kPa") || !strings.Contains(s, "0.4200") {
		t.Errorf("crowd load row %q, want kPa with the factor beside", s)
	}
	// The member detail shows the total and the change, each labelled.
	click, cancelClick := context.WithTimeout(ctx, 10*time.Second)
	defer cancelClick()
	if err := chromedp.Do(click, chromedp.Click(chromedp.CSS(`#truss line[data-member="D2"]`))); err != nil {
		t.Fatalf("clicking D2: %v", err)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "D2 detail", `document.getElementById('member-detail').textContent.includes('total force, measured')`)
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('member-detail').textContent`); !strings.Contains(s, "change since zeroing") || !strings.Contains(s, "utilisation (estimate)") {
		t.Errorf("member detail: %q", s)
	}
	browsertest.SaveScreenshot(ctx, t, "dashboard-utilisation.png")
}
