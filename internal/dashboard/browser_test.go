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
		Causes: []Cause{
			{Kind: "gauge_fault", Subject: "D2-a", T: 27.0, Size: 3050, Unit: "N"},
			{Kind: "stiffness_change", Subject: "D2", T: 22.4, Size: -0.07, Unit: "1"},
			{Kind: "node_load", Subject: "L2", T: 8.8, Size: 5100, Unit: "N"},
		},
	})
	browsertest.WaitJS(t, ctx, 20*time.Second, "D2 in alarm", `document.querySelector('#truss line[data-member="D2"]').getAttribute('data-state') === 'alarm'`)
	if c := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss line[data-member="D2"]').getAttribute('stroke')`); c != "rgb(196, 22, 28)" {
		t.Errorf("D2 colour in alarm %q, want the saturated alarm red rgb(196, 22, 28)", c)
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
	browsertest.SaveScreenshot(ctx, t, "dashboard-space-grid.png")
}
