package alerts

import (
	"context"
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// smallFS mounts a tmpfs of size bytes of the test's own and returns its
// path; it skips (fails under TRUSSMON_REQUIRE_TOOLS=1) where mounting is
// not possible (not root, no mount permission in a container).
func smallFS(t *testing.T, size string) string {
	t.Helper()
	dir := t.TempDir()
	if os.Geteuid() != 0 {
		requireOrSkip(t, "mounting a small file system for the full-disk test needs root (CI runs as root)")
	}
	if out, err := exec.Command("mount", "-t", "tmpfs", "-o", "size="+size, "tmpfs", dir).CombinedOutput(); err != nil {
		requireOrSkip(t, "cannot mount a tmpfs for the full-disk test: %v: %s", err, out)
	}
	t.Cleanup(func() {
		if out, err := exec.Command("umount", dir).CombinedOutput(); err != nil {
			t.Errorf("umount %s: %v: %s", dir, err, out)
		}
	})
	return dir
}

func requireOrSkip(t *testing.T, format string, args ...any) {
	t.Helper()
	if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
		t.Fatalf(format+" (TRUSSMON_REQUIRE_TOOLS=1 makes this a failure)", args...)
	}
	t.Skipf(format, args...)
}

// fill writes a file until the file system is full and returns its path.
func fill(t *testing.T, dir string) string {
	t.Helper()
	path := filepath.Join(dir, "filler")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	buf := make([]byte, 4096)
	for {
		if _, err := f.Write(buf); err != nil {
			if errors.Is(err, syscall.ENOSPC) {
				return path
			}
			t.Fatal(err)
		}
	}
}

// storeSink stores events in a real store, as the service does.
type storeSink struct{ st *store.Store }

func (s storeSink) PutEvent(ctx context.Context, e Event) error {
	ev, err := json.Marshal(e.Evidence)
	if err != nil {
		return err
	}
	return s.st.PutEvent(ctx, store.Event{Structure: e.Structure, Rule: string(e.Rule), Subject: e.Subject, Kind: string(e.Kind), Time: e.Time, Evidence: ev})
}

// TestEventsSurviveFullDisk: an alarm raised while the database's disk is
// full is stored once space returns, with its own time, and the alarm's
// clearing after it (issue 10, defect 1: "storing raised event of
// ChannelSilent ... database or disk is full" was logged once and the event
// never stored).
func TestEventsSurviveFullDisk(t *testing.T) {
	dir := smallFS(t, "4m")
	st, err := store.Open(filepath.Join(dir, "m.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	rules, err := DefaultRules()
	if err != nil {
		t.Fatal(err)
	}
	ev, err := NewEvaluator(rules, storeSink{st})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	last := t0
	obs := func(t time.Time) ([]Event, error) {
		return ev.Observe(ctx, Observation{Time: t, Structure: "alder-creek", Channels: []Channel{{Channel: "B2_a", LastReading: last}}})
	}
	if _, err := obs(t0); err != nil {
		t.Fatal(err)
	}
	filler := fill(t, dir)
	// Silent for 3 minutes: raised, but the disk is full.
	raisedAt := t0.Add(3 * time.Minute)
	evs, err := obs(raisedAt)
	if len(evs) != 1 || evs[0].Kind != Raised {
		t.Fatalf("events %+v; want ChannelSilent raised", evs)
	}
	if err == nil {
		t.Fatal("storing the event on a full disk did not fail; the test does not reproduce a full disk")
	}
	t.Logf("full disk: %v", err)
	// Still full a minute later: still not stored, nothing lost.
	if _, err := obs(raisedAt.Add(time.Minute)); err == nil {
		t.Fatal("stored on a still full disk?")
	}
	// Space returns; the next evaluations store what was pending, in
	// order, then the clearing.
	if err := os.Remove(filler); err != nil {
		t.Fatal(err)
	}
	if _, err := obs(raisedAt.Add(2 * time.Minute)); err != nil {
		t.Fatalf("after space returned: %v", err)
	}
	last = raisedAt.Add(2*time.Minute + 30*time.Second)
	if _, err := obs(raisedAt.Add(3 * time.Minute)); err != nil {
		t.Fatal(err)
	}
	stored, err := st.Events(ctx, "alder-creek", time.Time{}, time.Time{})
	if err != nil {
		t.Fatal(err)
	}
	if len(stored) != 2 || stored[0].Kind != store.Raised || !stored[0].Time.Equal(raisedAt) || stored[1].Kind != store.Cleared {
		t.Fatalf("stored events %+v; want ChannelSilent raised at %s, then cleared", stored, raisedAt)
	}
}
