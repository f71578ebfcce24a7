package dashboard

import (
	"context"
	"fmt"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"trussmonitor/internal/dashboard/browsertest"
	"trussmonitor/internal/reconcile"
)

// TestBrowserFootbridge drives the page in headless Chromium over the
// footbridge: every member drawn, a member turning to alarm between polls,
// clicking it shows its series, and a screenshot is saved.
func TestBrowserFootbridge(t *testing.T) {
	ctx, stop := browsertest.NewBrowser(t)
	defer stop()

	src := newMemSource()
	for i := 0; i < 40; i++ {
		src.addEpoch(t0.Add(time.Duration(i)*time.Second), "", 0)
	}
	srv := httptest.NewServer(New(src, Options{}))
	defer srv.Close()

	nav, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	if err := chromedp.Do(nav, chromedp.Navigate(srv.URL+"/?poll=300")); err != nil {
		t.Fatalf("opening %s: %v", srv.URL, err)
	}
	geom := footbridgeGeometry()
	browsertest.WaitJS(t, ctx, 20*time.Second, "members drawn", fmt.Sprintf(`document.querySelectorAll('#truss line[data-member]').length === %d`, len(geom.Members)))

	// Every member is drawn once, in the state its data gives.
	for _, m := range geom.Members {
		want := "ok"
		switch {
		case !m.Gauged:
			want = "ungauged"
		case m.ID == "V3":
			want = "unchecked"
		}
		got := browsertest.EvalJS[string](t, ctx, fmt.Sprintf(`(function(){const l=document.querySelectorAll('#truss line[data-member=%q]'); return l.length+':'+(l[0]?l[0].getAttribute('data-state'):'')})()`, m.ID))
		if got != "1:"+want {
			t.Errorf("member %s: count:state %q, want %q", m.ID, got, "1:"+want)
		}
	}
	if dash := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss line[data-member="V3"]').getAttribute('stroke-dasharray') || ''`); dash == "" {
		t.Errorf("the unchecked member V3 is not dashed")
	}
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('caution').textContent`); !strings.Contains(s, "not a safety verdict") {
		t.Errorf("caution on the page: %q", s)
	}
	checkDrawing(t, ctx, len(geom.Members), 2)
	if got := browsertest.EvalJS[string](t, ctx, `(function(){const s=document.querySelector('#supports [data-support="L0"]'); const r=document.querySelector('#supports [data-support="L6"]'); return (s?s.getAttribute('data-kind'):'')+'|'+(r?r.getAttribute('data-kind'):'')})()`); got != "pin|roller+spring" {
		t.Errorf("support symbols %q, want pin|roller+spring", got)
	}
	// deck and crowd act at the same nodes in the same direction: one arrow
	// per node, the estimated (unknown) pattern marked.
	if got := browsertest.EvalJS[string](t, ctx, `Array.from(document.querySelectorAll('#loads [data-load]')).map(a=>a.getAttribute('data-load')+':'+a.getAttribute('data-unknown')).join(' ')`); got != "L1:true L2:true L3:true L4:true L5:true" {
		t.Errorf("load arrows %q", got)
	}
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#member-marks [data-tied="D1"]').length`); n != 1 {
		t.Errorf("D1 (gauge fault and stiffness change not separable) has %d markers, want 1", n)
	}
	// The truss fills its panel: one direction to the padding, the other
	// at least half (a 15 m x 2.5 m truss is not a thin strip).
	if got := browsertest.EvalJS[string](t, ctx, `document.getElementById('truss').dataset.fill`); !fillsPanel(got) {
		t.Errorf("truss fill of its panel (width, height shares) %q", got)
	}
	if fit := browsertest.EvalJS[string](t, ctx, `document.getElementById('fit-status').dataset.rejected`); fit != "false" {
		t.Errorf("fit status before the fault: rejected=%s", fit)
	}

	// The fault: D2 strays by 5 sigma from the next epoch on.
	for i := 40; i < 50; i++ {
		src.addEpoch(t0.Add(time.Duration(i)*time.Second), "D2", 3000)
	}
	src.addEvent(Event{
		Time: t0.Add(45 * time.Second), Rule: "member_residual", Subject: "D2", Kind: "raised",
		W: 5.2, Size: 3050, SizeUnit: "N", Message: "D2 strays from prediction",
		Causes: []reconcile.RankedCause{
			{Kind: reconcile.GaugeFault, Subject: "D2-a", T: 27.0, Size: 3050, Unit: "N"},
			{Kind: reconcile.StiffnessChange, Subject: "D2", T: 22.4, Size: -0.07, Unit: "1"},
			{Kind: reconcile.NodalLoad, Subject: "L2", T: 8.8, Size: 5100, Unit: "N"},
		},
	})
	browsertest.WaitJS(t, ctx, 20*time.Second, "D2 in alarm", `document.querySelector('#truss line[data-member="D2"]').getAttribute('data-state') === 'alarm'`)
	// An alarm differs from "elevated" in kind: its own colour (not on the
	// |w| scale), a dark halo and a ring marker, all shown only in alarm.
	if c := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss line[data-member="D2"]').getAttribute('stroke')`); c != "#7b2cbf" {
		t.Errorf("D2 colour in alarm %q, want the alarm purple #7b2cbf", c)
	}
	for _, sel := range []string{`line[data-halo="D2"]`, `circle[data-alarm-mark="D2"]`} {
		if v := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss `+sel+`').getAttribute('visibility')`); v != "visible" {
			t.Errorf("%s in alarm: visibility %q", sel, v)
		}
		if v := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss `+strings.ReplaceAll(sel, "D2", "B3")+`').getAttribute('visibility')`); v != "hidden" {
			t.Errorf("%s for B3 (not in alarm): visibility %q", strings.ReplaceAll(sel, "D2", "B3"), v)
		}
	}
	// The top of the |w| scale (elevated, at the critical value) is not the
	// alarm colour.
	if c := browsertest.EvalJS[string](t, ctx, `colourFor(10, 3.29)`); c == "#7b2cbf" || !strings.HasPrefix(c, "rgb(205, 92, 18)") {
		t.Errorf("colour of |w| above k without alarm: %q", c)
	}
	if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss line[data-member="B3"]').getAttribute('data-state')`); s != "ok" {
		t.Errorf("B3 state %q after the fault on D2, want ok", s)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "fit rejected", `document.getElementById('fit-status').dataset.rejected === 'true'`)
	browsertest.WaitJS(t, ctx, 20*time.Second, "event row", `!!document.querySelector('#events tr[data-kind="raised"][data-subject="D2"] li')`)
	if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#events tr[data-subject="D2"]').textContent`); !strings.Contains(s, "gauge fault D2-a") || !strings.Contains(s, "stiffness change D2") {
		t.Errorf("event row lacks the ranked causes: %q", s)
	}

	// Clicking D2 shows its series with the band.
	click, cancelClick := context.WithTimeout(ctx, 10*time.Second)
	defer cancelClick()
	if err := chromedp.Do(click, chromedp.Click(chromedp.CSS(`#truss line[data-member="D2"]`))); err != nil {
		t.Fatalf("clicking D2: %v", err)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "series of D2", `document.getElementById('series-chart').getAttribute('data-member') === 'D2' && Number(document.getElementById('series-chart').getAttribute('data-points')) === 50`)
	for _, id := range []string{"series-measured", "series-predicted", "series-band"} {
		if ok := browsertest.EvalJS[bool](t, ctx, fmt.Sprintf(`(function(){const e=document.getElementById(%q); return !!e && (e.getAttribute('d')||e.getAttribute('points')||'').length > 20})()`, id)); !ok {
			t.Errorf("series chart has no drawn #%s", id)
		}
	}
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#series-alarms rect').length`); n != 10 {
		t.Errorf("alarm strip has %d marks, want 10 (epochs 40..49)", n)
	}
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('member-detail').textContent`); !strings.Contains(s, "alarm") {
		t.Errorf("member detail does not show the alarm: %q", s)
	}
	browsertest.SaveScreenshot(ctx, t, "dashboard-footbridge.png")
}

// TestBrowserSpaceGrid checks that a space truss is drawn projected and that
// the view turns with the buttons.
func TestBrowserSpaceGrid(t *testing.T) {
	ctx, stop := browsertest.NewBrowser(t)
	defer stop()

	src := &memSource{name: "harbour-hall", title: "Harbour Hall roof", geom: spaceGridGeometry(), k: 3.29}
	for i := 0; i < 5; i++ {
		src.addEpoch(t0.Add(time.Duration(i)*time.Second), "M3", 0)
	}
	srv := httptest.NewServer(New(src, Options{}))
	defer srv.Close()
	nav, cancel := context.WithTimeout(ctx, 20*time.Second)
	defer cancel()
	if err := chromedp.Do(nav, chromedp.Navigate(srv.URL+"/?poll=300")); err != nil {
		t.Fatalf("opening %s: %v", srv.URL, err)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "members drawn", fmt.Sprintf(`document.querySelectorAll('#truss line[data-member]').length === %d`, len(src.geom.Members)))
	if vis := browsertest.EvalJS[bool](t, ctx, `!document.getElementById('view-controls').hidden`); !vis {
		t.Errorf("view controls hidden for a space truss")
	}
	before := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss line[data-member="M1"]').getAttribute('x2')`)
	click, cancelClick := context.WithTimeout(ctx, 10*time.Second)
	defer cancelClick()
	if err := chromedp.Do(click, chromedp.Click(chromedp.CSS(`#rot-right`))); err != nil {
		t.Fatalf("clicking turn right: %v", err)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "view turned", fmt.Sprintf(`document.querySelector('#truss line[data-member="M1"]').getAttribute('x2') !== %q`, before))
	checkDrawing(t, ctx, len(src.geom.Members), 3)
	browsertest.SaveScreenshot(ctx, t, "dashboard-space-grid.png")
}

// labelOverlapsJS counts the pairs of member labels whose boxes (as laid
// out by the browser) overlap, and the labels drawn.
const labelOverlapsJS = `(function(){
  const b = Array.from(document.querySelectorAll('#member-labels text')).map(t => t.getBBox());
  let n = 0;
  for (let i = 0; i < b.length; i++) for (let j = i + 1; j < b.length; j++) {
    const p = b[i], q = b[j];
    if (p.x < q.x + q.width && q.x < p.x + p.width && p.y < q.y + q.height && q.y < p.y + p.height) n++;
  }
  return n + ' ' + b.length;
})()`

// checkDrawing asserts what every drawing shows: every member labelled
// (plane trusses) with no two label boxes overlapping (a geometric test on
// the boxes the browser laid out), and the axis marker with one axis per
// dimension.
func checkDrawing(t *testing.T, ctx context.Context, members, dim int) {
	t.Helper()
	got := browsertest.EvalJS[string](t, ctx, labelOverlapsJS)
	want := fmt.Sprintf("0 %d", members)
	if got != want {
		t.Errorf("label overlaps and labels drawn %q, want %q (unplaced: %q)", got, want, browsertest.EvalJS[string](t, ctx, `document.getElementById('member-labels').getAttribute('data-unplaced') || ''`))
	}
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#axis-marker line[data-axis]').length`); n != dim {
		t.Errorf("axis marker has %d axes, want %d", n, dim)
	}
}

// fillsPanel reports whether the "width height" shares of the drawing
// area taken by the truss have one at 1 (to rounding) and the other at
// least 0.5.
func fillsPanel(shares string) bool {
	var w, h float64
	if _, err := fmt.Sscanf(shares, "%g %g", &w, &h); err != nil {
		return false
	}
	return max(w, h) > 0.99 && max(w, h) < 1.01 && min(w, h) >= 0.5
}
