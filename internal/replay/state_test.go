package replay_test

import (
	"context"
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/replay"
	"trussmonitor/internal/report"
	"trussmonitor/internal/structfile"
)

// stateCheck is a sink that compares every fitted epoch's member state with
// an independent solve of the zero state.
type stateCheck struct {
	t        *testing.T
	zero     []float64 // force per member under the zero-state case
	ids      []string
	epochs   int
	measured int
	nominal  int     // measured member-epochs outside an adapted fit
	worst    float64 // largest |MeasuredTotalN - (zero + change)| / scale
	worstFit float64 // largest |PredictedTotalN - (ZeroStateN + FittedN)| / scale
	sample   reconcile.MemberState
}

func (c *stateCheck) Epoch(res *pipeline.Result) {
	if res.Outcome != reconcile.OutcomeAccepted && res.Outcome != reconcile.OutcomeRejected {
		if res.State != nil {
			c.t.Errorf("%s: %s epoch carries a member state", res.Time, res.Outcome)
		}
		return
	}
	c.epochs++
	if len(res.State) != len(c.ids) {
		c.t.Fatalf("%s: state of %d members, structure has %d", res.Time, len(res.State), len(c.ids))
	}
	byMember := map[string]reconcile.MemberResult{}
	for _, m := range res.Members {
		byMember[m.Member] = m
	}
	for k, ms := range res.State {
		if ms.Member != c.ids[k] {
			c.t.Fatalf("state %d is %s, want %s (structure order)", k, ms.Member, c.ids[k])
		}
		// The sensor map declares one zero state: every member's zero-state
		// force is the solve of the dead_only case.
		scale := math.Max(math.Abs(c.zero[k]), 1e3)
		if d := math.Abs(ms.ZeroStateN-c.zero[k]) / scale; d > 1e-9 {
			c.t.Errorf("%s %s: zero-state force %.6g N, solve of dead_only %.6g N", res.Time, ms.Member, ms.ZeroStateN, c.zero[k])
		}
		mr, gauged := byMember[ms.Member]
		if gauged != ms.Gauged {
			c.t.Errorf("%s: gauged %v, want %v", ms.Member, ms.Gauged, gauged)
		}
		if !gauged || !mr.Available {
			if ms.Measured || ms.TotalN != ms.PredictedTotalN {
				c.t.Errorf("%s %s: unmeasured member with measured %v, total %v, predicted %v", res.Time, ms.Member, ms.Measured, ms.TotalN, ms.PredictedTotalN)
			}
			continue
		}
		c.measured++
		want := c.zero[k] + mr.MeasuredN
		c.worst = math.Max(c.worst, math.Abs(ms.MeasuredTotalN-want)/scale)
		c.worst = math.Max(c.worst, math.Abs(ms.TotalN-want)/scale)
		// The predicted total is the nominal model's reconciled
		// prediction; while an alarm's cause is carried in an adapted fit
		// (res.Adapted), FittedN comes from that fit instead.
		if res.Adapted == nil {
			c.worstFit = math.Max(c.worstFit, math.Abs(ms.PredictedTotalN-(ms.ZeroStateN+mr.FittedN))/scale)
			c.nominal++
		}
		if ms.MeasuredChangeN != mr.MeasuredN {
			c.t.Errorf("%s: change %v, member result %v", ms.Member, ms.MeasuredChangeN, mr.MeasuredN)
		}
		if math.IsNaN(ms.Utilisation) || ms.Utilisation < 0 {
			c.t.Errorf("%s: utilisation %v", ms.Member, ms.Utilisation)
		}
		if ms.Member == "D2" && c.sample.Member == "" && !res.Time.Before(faultTime.Add(2*time.Hour)) {
			c.sample = ms
		}
	}
}

// TestMemberStateRecordedDay replays the recorded day and checks the total
// force of every gauged member in every fitted epoch against the solve of
// the zero-state case (the sensor map's zero state is the dead load at the
// reference temperature: `monitor solve --case dead_only`) plus the
// measured change since zeroing, and the reconciled prediction of a
// gauged member against its zero-state force plus its fitted change
// (closed form: both are the same linear model).
func TestMemberStateRecordedDay(t *testing.T) {
	path := importDay(t, true)
	st, err := structfile.LoadFile(structureFile)
	if err != nil {
		t.Fatal(err)
	}
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	dead, err := m.SolveCase("dead_only")
	if err != nil {
		t.Fatal(err)
	}
	c := &stateCheck{t: t, zero: dead.Forces}
	for _, mb := range st.Members {
		c.ids = append(c.ids, mb.ID)
	}
	out := t.TempDir()
	_, err = replay.Run(context.Background(), replay.Options{
		DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile, Sinks: []pipeline.Sink{c}, OutDir: out,
	})
	if err != nil {
		t.Fatal(err)
	}
	checkMemberReport(t, out, c)
	t.Logf("%d fitted epochs, %d measured member-epochs (%d of them not adapted); worst relative differences %.2g (total), %.2g (prediction)", c.epochs, c.measured, c.nominal, c.worst, c.worstFit)
	t.Logf("D2 at 16:00: zero state %.2f kN + change %.2f kN = total %.2f kN (predicted %.2f kN, ratio %.3f), utilisation %.3f",
		c.sample.ZeroStateN/1e3, c.sample.MeasuredChangeN/1e3, c.sample.MeasuredTotalN/1e3, c.sample.PredictedTotalN/1e3, c.sample.Ratio, c.sample.Utilisation)
	if c.nominal < 800*18 {
		t.Errorf("only %d measured member-epochs outside adaptation", c.nominal)
	}
	if c.epochs < 1000 || c.measured < 1000*18 {
		t.Fatalf("only %d fitted epochs, %d measured member-epochs", c.epochs, c.measured)
	}
	if c.worst > 1e-12 {
		t.Errorf("total force differs from solve + change by %.3g relative", c.worst)
	}
	if c.worstFit > 1e-9 {
		t.Errorf("prediction differs from zero state + fitted change by %.3g relative", c.worstFit)
	}
}

// checkMemberReport checks members.csv and the report's member section:
// one row per member with its largest utilisation, and the caution beside
// every utilisation; the crowd estimate in kPa.
func checkMemberReport(t *testing.T, dir string, c *stateCheck) {
	t.Helper()
	f, err := os.Open(filepath.Join(dir, report.MembersFile))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 1+len(c.ids) || rows[0][0] != "member" || rows[0][8] != "utilisation_max" {
		t.Fatalf("members.csv: %d rows, header %v", len(rows), rows[0])
	}
	for _, r := range rows[1:] {
		u, err := strconv.ParseFloat(r[8], 64)
		if err != nil || !(u > 0) || u > 1 {
			t.Errorf("member %s: largest utilisation %q", r[0], r[8])
		}
		if r[0] == "D2" {
			t.Logf("D2 over the day: total %s .. %s N, largest utilisation %s at %s", r[4], r[5], r[8], r[9])
		}
	}
	html, err := os.ReadFile(filepath.Join(dir, report.HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{report.UtilisationCaution, "change since zeroing (kN)", "crowd (kPa)", "EN 1993-1-1"} {
		if !strings.Contains(string(html), want) {
			t.Errorf("index.html lacks %q", want)
		}
	}
}
