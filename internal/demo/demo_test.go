package demo

import (
	"bytes"
	"context"
	"fmt"
	"log/slog"
	"net/http"
	"strings"
	"sync"
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
	logBuf := &syncBuffer{}
	d, err := Start(runCtx, Options{
		Listen: "127.0.0.1:0", Speed: 20, Fault: "stiffness:D2:1m:0.3", Seed: 7, Roof: true,
		Logger: slog.New(slog.NewTextHandler(logBuf, nil)),
	})
	if err != nil {
		stop()
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- d.Wait(runCtx) }()
	stopped := false
	shutdown := func() {
		if stopped {
			return
		}
		stopped = true
		stop()
		if err := <-done; err != nil {
			t.Errorf("demo shutdown: %v", err)
		}
	}
	defer shutdown()

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
	// The header says the time is simulated and at what speed.
	if s := browsertest.EvalJS[string](t, ctx, `document.getElementById('epoch').textContent`); !strings.Contains(s, "simulated time (demo), 20 x real time") {
		t.Errorf("header epoch %q lacks the simulated-time note", s)
	}
	checkRealDrawing(t, ctx, members, 2)
	// Symbols of the footbridge's supports (pin at L0, roller with a spring
	// at L8) and load arrows.
	if got := browsertest.EvalJS[string](t, ctx, `['L0','L8'].map(n => (document.querySelector('#supports [data-support="'+n+'"]')||{getAttribute:()=>''}).getAttribute('data-kind')).join('|')`); got != "pin|roller+spring" {
		t.Errorf("footbridge support symbols %q", got)
	}
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#loads [data-load]').length`); n == 0 {
		t.Errorf("no load arrows on the footbridge")
	}
	browsertest.SaveScreenshot(ctx, t, "dashboard-footbridge-fault.png")

	// The roof: a space truss with its axis marker and supports.
	if ok := browsertest.EvalJS[bool](t, ctx, `(function(){const s=document.getElementById('structure-select'); s.value='harbour-hall'; s.dispatchEvent(new Event('change')); return s.value === 'harbour-hall'})()`); !ok {
		t.Fatalf("choosing the roof failed")
	}
	roof := len(d.Structure("harbour-hall").Members)
	browsertest.WaitJS(t, ctx, 30*time.Second, "every roof member drawn", fmt.Sprintf(`document.getElementById('truss').dataset.dimension === '3' && document.querySelectorAll('#truss line[data-member]').length === %d`, roof))
	browsertest.WaitJS(t, ctx, 30*time.Second, "a roof epoch", `/epoch 2/.test(document.getElementById('epoch').textContent)`)
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#axis-marker line[data-axis]').length`); n != 3 {
		t.Errorf("roof axis marker has %d axes, want 3", n)
	}
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#supports [data-support]').length`); n != len(d.Structure("harbour-hall").Supports) {
		t.Errorf("roof: %d support symbols, want %d", n, len(d.Structure("harbour-hall").Supports))
	}
	browsertest.SaveScreenshot(ctx, t, "dashboard-roof.png")

	// The log after shutdown: every deliberate bad message is announced
	// before the service refuses it, and nothing is logged without a
	// message.
	shutdown()
	log := logBuf.String()
	announced := strings.Count(log, "deliberate bad message")
	rejected := strings.Count(log, `msg="ingest: message rejected"`)
	if rejected > announced {
		t.Errorf("%d rejected messages but only %d announced as deliberate", rejected, announced)
	}
	if !strings.Contains(log, "bad messages on purpose") {
		t.Errorf("the log does not say that the demo sends bad messages on purpose")
	}
	if strings.Contains(log, `msg=""`) {
		t.Errorf("a log line without a message:\n%s", log)
	}
	t.Logf("%d bad messages announced, %d rejected", announced, rejected)
}

// syncBuffer is a bytes.Buffer safe for the logger's concurrent writes.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// checkRealDrawing asserts that no two member labels overlap (a geometric
// test on the boxes the browser laid out), that every member is labelled,
// and that the axis marker has one axis per dimension.
func checkRealDrawing(t *testing.T, ctx context.Context, members, dim int) {
	t.Helper()
	got := browsertest.EvalJS[string](t, ctx, `(function(){
	  const b = Array.from(document.querySelectorAll('#member-labels text')).map(t => t.getBBox());
	  let n = 0;
	  for (let i = 0; i < b.length; i++) for (let j = i + 1; j < b.length; j++) {
	    const p = b[i], q = b[j];
	    if (p.x < q.x + q.width && q.x < p.x + p.width && p.y < q.y + q.height && q.y < p.y + p.height) n++;
	  }
	  return n + ' ' + b.length;
	})()`)
	if want := fmt.Sprintf("0 %d", members); got != want {
		t.Errorf("label overlaps and labels drawn %q, want %q", got, want)
	}
	if n := browsertest.EvalJS[int](t, ctx, `document.querySelectorAll('#axis-marker line[data-axis]').length`); n != dim {
		t.Errorf("axis marker has %d axes, want %d", n, dim)
	}
}
