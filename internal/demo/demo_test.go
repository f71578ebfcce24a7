package demo

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"trussmonitor/internal/dashboard/browsertest"
)

// TestDemoDashboardInBrowser runs the real demo (embedded broker,
// simulator, service) with a 30 % stiffness loss of diagonal D2 and drives
// its dashboard in headless Chromium: every member of the footbridge is
// drawn, D2 turns to the alarm state after the fault, and clicking it shows
// its series. A screenshot is saved as a test artifact.
func TestDemoDashboardInBrowser(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo for about half a minute")
	}
	ctx, stopBrowser := browsertest.NewBrowser(t)
	defer stopBrowser()

	runCtx, stop := context.WithCancel(context.Background())
	d, err := Start(runCtx, Options{
		Listen: "127.0.0.1:0", Speed: 20, Fault: "stiffness:D2:1m:0.3", Seed: 7,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil)),
	})
	if err != nil {
		stop()
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- d.Wait(runCtx) }()
	defer func() {
		stop()
		if err := <-done; err != nil {
			t.Errorf("demo shutdown: %v", err)
		}
	}()

	// The page is served, with the caution.
	resp, err := http.Get(d.URL())
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET %s: %s", d.URL(), resp.Status)
	}

	nav, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	if err := chromedp.Do(nav, chromedp.Navigate(d.URL()+"?poll=500")); err != nil {
		t.Fatalf("opening %s: %v", d.URL(), err)
	}
	members := len(d.Structure("alder-creek").Members)
	browsertest.WaitJS(t, ctx, 30*time.Second, "every footbridge member drawn", fmt.Sprintf(`document.querySelectorAll('#truss line[data-member]').length === %d`, members))
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('caution').textContent`); !strings.Contains(s, "not a safety verdict") {
		t.Errorf("caution on the page: %q", s)
	}
	// Before the fault (simulated minute 1 = 3 s of wall time) D2 is not in
	// alarm.
	if s := browsertest.EvalJS[string](t, ctx, `document.querySelector('#truss line[data-member="D2"]').getAttribute('data-state')`); s == "alarm" {
		t.Errorf("D2 in alarm before the fault")
	}
	// The alarm needs |w| over the critical value for the rule's 2 minute
	// for-duration: about 10 s of wall time after the fault at speed 20.
	browsertest.WaitJS(t, ctx, 60*time.Second, "D2 in alarm", `(document.querySelector('#truss line[data-member="D2"]')||{getAttribute:()=>''}).getAttribute('data-state') === 'alarm'`)
	if d.Now().Before(d.FaultTime()) {
		t.Errorf("alarm before the fault time %s (clock %s)", d.FaultTime(), d.Now())
	}
	click, cancelClick := context.WithTimeout(ctx, 10*time.Second)
	defer cancelClick()
	if err := chromedp.Do(click, chromedp.Click(chromedp.CSS(`#truss line[data-member="D2"]`))); err != nil {
		t.Fatalf("clicking D2: %v", err)
	}
	browsertest.WaitJS(t, ctx, 20*time.Second, "series of D2", `document.getElementById('series-chart').getAttribute('data-member') === 'D2' && Number(document.getElementById('series-chart').getAttribute('data-points')) > 10`)
	browsertest.WaitJS(t, ctx, 20*time.Second, "event row for D2", `!!document.querySelector('#events tr[data-kind="raised"][data-subject="D2"]')`)
	browsertest.SaveScreenshot(ctx, t, "demo-dashboard.png")
}
