// Package browsertest starts a headless Chromium for tests that drive a page
// with github.com/chromedp/chromedp (the dashboard's own test and the demo's
// end-to-end test).
//
// The browser is Debian's chromium (/usr/bin/chromium, or the path in
// TRUSSMON_CHROMIUM). When it is missing the test is skipped with a message
// naming the tool, or fails when TRUSSMON_REQUIRE_TOOLS=1.
package browsertest

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// FindChromium returns the path of the Chromium executable, or "" when none
// is installed. TRUSSMON_CHROMIUM overrides the search.
func FindChromium() string {
	if p := os.Getenv("TRUSSMON_CHROMIUM"); p != "" {
		return p
	}
	for _, name := range []string{"/usr/bin/chromium", "chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	return ""
}

// RequireTools reports whether TRUSSMON_REQUIRE_TOOLS=1 is set, in which
// case a missing outside tool fails a test instead of skipping it.
func RequireTools() bool { return os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" }

// NewBrowser starts a headless Chromium with a fresh profile and returns a
// chromedp context for one tab and a function that stops the browser. The
// browser is started before NewBrowser returns, so a later timeout on a
// context derived from the returned one limits only the actions.
func NewBrowser(t testing.TB) (context.Context, func()) {
	t.Helper()
	path := FindChromium()
	if path == "" {
		const msg = "chromium not found (install Debian's chromium: apt-get install -y chromium, or set TRUSSMON_CHROMIUM)"
		if RequireTools() {
			t.Fatal(msg + "; TRUSSMON_REQUIRE_TOOLS=1 forbids skipping")
		}
		t.Skip(msg)
	}
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(path),
		chromedp.Flag("headless", true),
		chromedp.Flag("no-sandbox", true),
		chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("no-first-run", true),
		chromedp.Flag("no-default-browser-check", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-extensions", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("hide-scrollbars", true),
		chromedp.Flag("mute-audio", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1400, 1000),
	}
	allocCtx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelCtx := chromedp.NewContext(allocCtx)
	// Start the browser now, on a context without a deadline.
	if err := chromedp.Do(ctx); err != nil {
		cancelCtx()
		cancelAlloc()
		t.Fatalf("starting chromium %s: %v", path, err)
	}
	stop := func() {
		done := make(chan struct{})
		go func() {
			cancelCtx()
			cancelAlloc()
			close(done)
		}()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			t.Logf("chromium did not stop within 10 s")
		}
	}
	return ctx, stop
}

// ArtifactDir returns the directory for test artifacts such as screenshots:
// TRUSSMON_ARTIFACTS when set (created if needed), otherwise a fresh
// t.TempDir().
func ArtifactDir(t testing.TB) string {
	t.Helper()
	dir := os.Getenv("TRUSSMON_ARTIFACTS")
	if dir == "" {
		return t.TempDir()
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatalf("creating artifact directory %s (from TRUSSMON_ARTIFACTS): %v", dir, err)
	}
	return dir
}

// SaveScreenshot writes a PNG of the whole page into ArtifactDir under name
// and returns its path.
func SaveScreenshot(ctx context.Context, t testing.TB, name string) string {
	t.Helper()
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatalf("screenshot %s: %v", name, err)
	}
	p := filepath.Join(ArtifactDir(t), name)
	if err := os.WriteFile(p, png, 0o644); err != nil {
		t.Fatalf("writing screenshot %s: %v", p, err)
	}
	t.Logf("screenshot saved to %s", p)
	return p
}

// WaitJS polls a JavaScript predicate in the page until it is true, failing
// the test with what it waited for after limit.
func WaitJS(t testing.TB, ctx context.Context, limit time.Duration, what, expr string) {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, limit)
	defer cancel()
	if _, err := chromedp.Run(c, chromedp.Poll[bool](expr, chromedp.WithPollingInterval(100*time.Millisecond))); err != nil {
		t.Fatalf("waiting for %s (%s): %v", what, expr, err)
	}
}

// EvalJS evaluates a JavaScript expression in the page and returns its
// value.
func EvalJS[T any](t testing.TB, ctx context.Context, expr string) T {
	t.Helper()
	c, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	v, err := chromedp.Run(c, chromedp.Evaluate[T](expr))
	if err != nil {
		t.Fatalf("evaluating %s: %v", expr, err)
	}
	return v
}
