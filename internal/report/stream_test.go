package report

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// TestStreamDropsUnusedPatternColumns streams the small report with two
// more pattern columns, one estimated in some epochs and one never, drops
// the unused one at Finish, and compares every file with Write of the same
// report built with only the kept columns.
func TestStreamDropsUnusedPatternColumns(t *testing.T) {
	full := smallReport()
	full.Patterns = append(full.Patterns, Pattern{Name: "panel_3", Unit: "kN", Reference: 1}, Pattern{Name: "panel_5", Unit: "1"})
	for i := range full.Epochs {
		e := &full.Epochs[i]
		e.Loads = append(e.Loads, LoadEstimate{Present: i >= 4, Value: 2.5 + float64(i), StdDev: 0.5}, LoadEstimate{})
	}
	want := *full
	want.Patterns = full.Patterns[:2]
	want.Epochs = nil
	for _, e := range full.Epochs {
		e.Loads = e.Loads[:2]
		want.Epochs = append(want.Epochs, e)
	}
	wantDir := t.TempDir()
	if err := Write(wantDir, &want); err != nil {
		t.Fatal(err)
	}

	head := *full
	head.Epochs = nil
	dir := filepath.Join(t.TempDir(), "report")
	s, err := NewStream(dir, &head)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range full.Epochs {
		if err := s.Add(e); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.Finish([]bool{true, true, false}); err != nil {
		t.Fatal(err)
	}
	if len(head.Patterns) != 2 || head.Patterns[1].Name != "panel_3" {
		t.Errorf("patterns after Finish %+v, want crowd and panel_3", head.Patterns)
	}
	for _, name := range []string{EpochsFile, EventsFile, HTMLFile} {
		a, err1 := os.ReadFile(filepath.Join(dir, name))
		b, err2 := os.ReadFile(filepath.Join(wantDir, name))
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		if !bytes.Equal(a, b) {
			t.Errorf("%s of the stream differs from Write's", name)
		}
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 3 {
		t.Errorf("report folder holds %d entries, want 3 (no temporaries)", len(ents))
	}
}

// TestStreamAbort: an unfinished stream leaves no file, and no folder when
// it created it; Add after Abort fails; a stream needs its period.
func TestStreamAbort(t *testing.T) {
	r := smallReport()
	head := *r
	head.Epochs = nil
	dir := filepath.Join(t.TempDir(), "report")
	s, err := NewStream(dir, &head)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Add(r.Epochs[0]); err != nil {
		t.Fatal(err)
	}
	s.Abort()
	if _, err := os.Stat(dir); !os.IsNotExist(err) {
		t.Errorf("report folder left after Abort: %v", err)
	}
	if err := s.Add(r.Epochs[1]); err == nil {
		t.Errorf("Add after Abort accepted")
	}
	head.From = time.Time{}
	if _, err := NewStream(dir, &head); err == nil {
		t.Errorf("stream without a period accepted")
	}
}

// TestStepCounterMedian: exact median of the epoch intervals while they
// are few distinct values (a replay's epochs close on window boundaries),
// within 1/32 once there are more than maxDistinctSteps.
func TestStepCounterMedian(t *testing.T) {
	var c stepCounter
	for i := 0; i < 1000; i++ {
		d := int64(time.Second)
		if i%10 == 0 {
			d = 5 * int64(time.Second)
		}
		c.add(d)
	}
	if m := c.median(); m != int64(time.Second) {
		t.Errorf("median %v, want 1s", time.Duration(m))
	}
	var many stepCounter
	const n = 3 * maxDistinctSteps
	for i := int64(1); i <= n; i++ {
		many.add(i * 1000)
	}
	if len(many.counts) > maxDistinctSteps || !many.coarse {
		t.Errorf("%d distinct intervals kept (coarse %v), want at most %d", len(many.counts), many.coarse, maxDistinctSteps)
	}
	exact := float64(n/2+1) * 1000 // element n/2 of 1000, 2000, ...
	if m := float64(many.median()); math.Abs(m-exact) > exact/32 {
		t.Errorf("median %v, want %v within 1/32", m, exact)
	}
}
