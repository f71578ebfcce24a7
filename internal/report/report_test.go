package report

import (
	"bytes"
	"encoding/csv"
	"encoding/xml"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
	"trussmonitor/internal/reconcile"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

var t0 = time.Date(2026, 6, 14, 9, 0, 0, 0, time.UTC)

// smallReport is six epochs of three gauged members of the invented Alder
// Creek footbridge: D2 strays from epoch 3 on, its gauge is missing in epoch
// 2, V3 cannot be checked (redundancy 0), one unknown load is estimated.
func smallReport() *Report {
	r := &Report{
		Structure: "alder-creek", Title: "Alder Creek footbridge", ModelVersion: "sha256:9f2c41d07be3a8e5",
		From: t0, To: t0.Add(6 * time.Second), CriticalValue: 3.29, Alpha: 0.001,
		Members:  []string{"B3", "D2", "V3"},
		Patterns: []Pattern{{Name: "crowd", Unit: "1"}},
	}
	for i := 0; i < 6; i++ {
		e := Epoch{Time: t0.Add(time.Duration(i)*time.Second + 250*time.Millisecond)}
		shift := 0.0
		if i >= 3 {
			shift = 3100
		}
		e.Members = []MemberResult{
			{Present: true, Measured: 52140.5 + 37*float64(i), Predicted: 52000 + 40*float64(i), SigmaResidual: 610.25, W: 0.23 - 0.005*float64(i), Checkable: true},
			{Present: i != 2, Measured: -38400 + shift + 0.1, Predicted: -38460.125, SigmaResidual: 598, W: (60.225 + shift) / 598, Checkable: true},
			{Present: true, Measured: 120, Predicted: 0, SigmaResidual: 0, W: math.NaN(), Checkable: false},
		}
		e.Fit = Fit{ChiSquare: 3.2 + float64(i)/3, DOF: 2, PValue: math.Exp(-(3.2 + float64(i)/3) / 2), Rejected: false}
		if i >= 3 {
			e.Fit = Fit{ChiSquare: 30.1, DOF: 2, PValue: 2.9e-7, Rejected: true}
		}
		e.Loads = []LoadEstimate{{Present: true, Value: 0.4 + 0.01*float64(i), StdDev: 0.05}}
		r.Epochs = append(r.Epochs, e)
	}
	r.Events = []Event{
		{Time: t0.Add(4*time.Second + 250*time.Millisecond), Rule: "member_residual", Subject: "D2", Kind: "raised",
			W: 5.28, Size: 3160.2, SizeUnit: "N", Message: "D2 strays from prediction, \"5.3 sigma\"",
			Causes: []reconcile.RankedCause{
				{Kind: reconcile.GaugeFault, Subject: "D2-a", T: 27.9, Size: 3160.2, Unit: "N"},
				{Kind: reconcile.StiffnessChange, Subject: "D2", T: 24.1, Size: -0.081, Unit: "1"},
				{Kind: reconcile.NodalLoad, Subject: "L2", T: 9.4, Size: 5230, Unit: "N"},
				{Kind: reconcile.SupportSettlement, Subject: "L0", T: 1.2, Size: 0.0004, Unit: "m"},
			}},
		{Time: t0.Add(4*time.Second + 250*time.Millisecond), Rule: "fit_rejected", Subject: "alder-creek", Kind: "raised",
			W: math.NaN(), Size: math.NaN(), Message: "global test rejected for 2 epochs"},
		{Time: t0.Add(4*time.Second + 500*time.Millisecond), Rule: "member_shifted", Subject: "B4", Kind: "raised",
			W: 2.1, Size: 1210.5, SizeUnit: "N", Message: "B4 shifted",
			Causes: []reconcile.RankedCause{
				{Kind: reconcile.StiffnessChange, Subject: "B4", T: 51.2, Size: -29.6, Std: 0.41, Unit: "%", Group: 1},
				{Kind: reconcile.GaugeFault, Subject: "B4", T: 51.2, Size: 1210.5, Std: 17.5, Unit: "N", Group: 1},
				{Kind: reconcile.NodalLoad, Subject: "U3 y", T: 12.5, Size: -2100, Std: 600, Unit: "N", Group: 2},
				{Kind: reconcile.SupportSettlement, Subject: "L8 y", T: 11.5, Size: 2.5, Std: 0.8, Unit: "mm", Group: 3, Implausible: true},
			},
			CausesAt:   t0.Add(5 * time.Second),
			LoadShifts: []LoadShift{{Pattern: "crowd", Value: -0.31, Mean: 0.02, StdDev: 0.04, Unit: "kPa", Z: -7.31}},
			Adapted:    []reconcile.RankedCause{{Kind: reconcile.StiffnessChange, Subject: "B4", Size: -29.9, Std: 0.6, Unit: "%"}}},
		{Time: t0.Add(5*time.Second + 750*time.Millisecond), Rule: "fit_rejected", Subject: "alder-creek", Kind: "cleared",
			W: math.NaN(), Size: math.NaN()},
	}
	return r
}

func writeSmall(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	if err := Write(dir, smallReport()); err != nil {
		t.Fatal(err)
	}
	return dir
}

func TestGoldenCSV(t *testing.T) {
	dir := writeSmall(t)
	for _, name := range []string{EpochsFile, EventsFile} {
		got, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		golden := filepath.Join("testdata", "small."+name)
		if *update {
			if err := os.WriteFile(golden, got, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		want, err := os.ReadFile(golden)
		if err != nil {
			t.Fatalf("%v (run go test -update once to create it)", err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s differs from %s:\n got: %q\nwant: %q", name, golden, got, want)
		}
	}
}

// TestEpochsCSVReadsBack parses epochs.csv and checks every value reads
// back to exactly the float64 written ('g' -1 formatting is exact).
func TestEpochsCSVReadsBack(t *testing.T) {
	r := smallReport()
	dir := writeSmall(t)
	f, err := os.Open(filepath.Join(dir, EpochsFile))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 1+len(r.Epochs) {
		t.Fatalf("%d rows, want %d", len(rows), 1+len(r.Epochs))
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	for i, e := range r.Epochs {
		row := rows[i+1]
		if tm, err := time.Parse(time.RFC3339Nano, row[col["time"]]); err != nil || !tm.Equal(e.Time) {
			t.Errorf("epoch %d time %q: %v", i, row[col["time"]], err)
		}
		for j, m := range r.Members {
			mr := e.Members[j]
			cell := row[col[m+"_measured_n"]]
			if !mr.Present {
				if cell != "" {
					t.Errorf("epoch %d %s: missing gauge written as %q, want empty", i, m, cell)
				}
				continue
			}
			for name, want := range map[string]float64{"_measured_n": mr.Measured, "_predicted_n": mr.Predicted, "_sigma_residual_n": mr.SigmaResidual, "_w": mr.W} {
				got, err := strconv.ParseFloat(row[col[m+name]], 64)
				if err != nil || !(got == want || math.IsNaN(got) && math.IsNaN(want)) {
					t.Errorf("epoch %d %s%s: read back %v (%v), wrote %v", i, m, name, got, err, want)
				}
			}
		}
		if got, _ := strconv.ParseFloat(row[col["p_value"]], 64); got != e.Fit.PValue {
			t.Errorf("epoch %d p_value read back %v, wrote %v", i, got, e.Fit.PValue)
		}
	}
}

// xmlTree is a minimal element tree for structural checks of index.html,
// which is written as well-formed XML.
type xmlTree struct {
	XMLName xml.Name
	Attrs   []xml.Attr `xml:",any,attr"`
	Kids    []xmlTree  `xml:",any"`
	Text    string     `xml:",chardata"`
}

func (n *xmlTree) attr(name string) string {
	for _, a := range n.Attrs {
		if a.Name.Local == name {
			return a.Value
		}
	}
	return ""
}

func (n *xmlTree) walk(f func(*xmlTree)) {
	f(n)
	for i := range n.Kids {
		n.Kids[i].walk(f)
	}
}

func (n *xmlTree) text() string {
	var sb strings.Builder
	n.walk(func(k *xmlTree) { sb.WriteString(k.Text) })
	return sb.String()
}

func parseHTML(t *testing.T, b []byte) *xmlTree {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(b))
	d.Strict = true
	var root xmlTree
	if err := d.Decode(&root); err != nil {
		t.Fatalf("index.html is not well-formed: %v", err)
	}
	// nothing may follow the root element but white space
	if tok, err := d.Token(); err != io.EOF {
		if cd, ok := tok.(xml.CharData); !ok || strings.TrimSpace(string(cd)) != "" {
			t.Fatalf("content after </html>: %v %v", tok, err)
		}
	}
	return &root
}

func TestHTMLStructure(t *testing.T) {
	dir := writeSmall(t)
	b, err := os.ReadFile(filepath.Join(dir, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	root := parseHTML(t, b)
	ids := map[string]*xmlTree{}
	count := map[string]int{}
	root.walk(func(n *xmlTree) {
		count[n.XMLName.Local]++
		if id := n.attr("id"); id != "" {
			if ids[id] != nil {
				t.Errorf("id %q used twice", id)
			}
			ids[id] = n
		}
		for _, a := range n.Attrs {
			if (a.Name.Local == "href" || a.Name.Local == "src") && strings.Contains(a.Value, ":") {
				t.Errorf("<%s %s=%q> refers outside the folder", n.XMLName.Local, a.Name.Local, a.Value)
			}
		}
	})
	if count["script"] != 0 || count["link"] != 0 || count["img"] != 0 {
		t.Errorf("report must be self-contained: %d script, %d link, %d img elements", count["script"], count["link"], count["img"])
	}
	for _, id := range []string{"caution", "model-version", "summary-table", "member-summary", "alarm-timeline", "event-table", "fit-pvalue",
		"load-crowd", "force-B3", "w-B3", "force-D2", "w-D2", "force-V3", "w-V3"} {
		if ids[id] == nil {
			t.Errorf("no element with id %q", id)
		}
	}
	if c := ids["caution"]; c == nil || !strings.Contains(c.text(), "not a safety verdict") || !strings.Contains(c.text(), "licensed engineer") {
		t.Errorf("caution missing or without the safety text")
	}
	if v := ids["model-version"]; v == nil || v.text() != "sha256:9f2c41d07be3a8e5" {
		t.Errorf("model version not shown")
	}
	// force plot of D2: band polygons, predicted and measured paths; the
	// missing gauge in epoch 2 does not break the line (gap < 5 intervals).
	classes := map[string]int{}
	ids["force-D2"].walk(func(n *xmlTree) { classes[n.XMLName.Local+"."+n.attr("class")]++ })
	if classes["polygon.band"] != 1 || classes["path.measured"] != 1 || classes["path.predicted"] != 1 {
		t.Errorf("force-D2 elements %v", classes)
	}
	// w plot has the two critical lines
	crit := 0
	ids["w-D2"].walk(func(n *xmlTree) {
		if n.XMLName.Local == "line" && n.attr("class") == "critical" {
			crit++
		}
	})
	if crit != 2 {
		t.Errorf("w-D2 has %d critical lines, want 2 (+k and -k)", crit)
	}
	// V3 is never checkable: its w plot has no line and says so
	if s := ids["w-V3"].text(); !strings.Contains(s, "not checkable") {
		t.Errorf("w-V3 does not say the member is not checkable: %q", s)
	}
	// event table: three rows; the first lists exactly the top three causes
	var rows []*xmlTree
	ids["event-table"].walk(func(n *xmlTree) {
		if n.XMLName.Local == "tr" && n.attr("data-subject") != "" {
			rows = append(rows, n)
		}
	})
	if len(rows) != 4 {
		t.Fatalf("event table has %d rows, want 4", len(rows))
	}
	// The B4 alarm: its sizes' epoch, its first group whole with each
	// size's standard deviation, the carried hypothesis and the flagged
	// load; the implausible fourth cause (group 3) is cut.
	b4 := rows[2].text()
	for _, want := range []string{
		"sizes over the epochs since the fault began, as of 2026-06-14T09:00:05Z",
		"[group 1] stiffness change B4: T = 51.2, size -29.6 % ± 0.41 %",
		"[group 1] gauge fault B4: T = 51.2, size 1.21 kN ± 0.02 kN",
		"[group 2] nodal load U3 y",
		"carried in the adapted fit: stiffness change B4: size -29.9 % ± 0.6 %",
		"unknown load crowd left its recent distribution when the alarm rose: -0.31 kPa against 0.02 kPa ± 0.04 kPa (z = -7.3)",
	} {
		if !strings.Contains(b4, want) {
			t.Errorf("B4 event lacks %q: %q", want, b4)
		}
	}
	if strings.Contains(b4, "L8 y") {
		t.Errorf("B4 event lists the fourth cause (not of the first group): %q", b4)
	}
	li := 0
	rows[0].walk(func(n *xmlTree) {
		if n.XMLName.Local == "li" {
			li++
		}
	})
	if li != 3 || !strings.Contains(rows[0].text(), "gauge fault D2-a: T = 27.9, size 3.16 kN") {
		t.Errorf("first event: %d causes, text %q", li, rows[0].text())
	}
	// alarm timeline: D2 open from 09:00:04.25 to the end; fit_rejected cleared
	alarmRects := map[string]int{}
	rejects := 0
	ids["alarm-timeline"].walk(func(n *xmlTree) {
		if n.XMLName.Local == "g" && n.attr("data-row") != "" {
			row := n.attr("data-row")
			n.walk(func(k *xmlTree) {
				if k.XMLName.Local == "rect" && k.attr("class") == "alarm" {
					alarmRects[row]++
				}
			})
		}
		if n.XMLName.Local == "rect" && n.attr("class") == "reject" {
			rejects++
		}
	})
	if alarmRects["member_residual: D2"] != 1 || alarmRects["fit_rejected: alder-creek"] != 1 || rejects != 1 {
		t.Errorf("timeline alarm bars %v, reject runs %d; want one each", alarmRects, rejects)
	}
}

func TestDeterministic(t *testing.T) {
	a, b := writeSmall(t), writeSmall(t)
	for _, name := range []string{HTMLFile, EpochsFile, EventsFile} {
		x, err1 := os.ReadFile(filepath.Join(a, name))
		y, err2 := os.ReadFile(filepath.Join(b, name))
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs between two writes of the same report", name)
		}
	}
	// rewriting into the same folder replaces the files and leaves no temporaries
	if err := Write(a, smallReport()); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(a)
	if len(ents) != 3 {
		t.Errorf("folder holds %d entries after a rewrite, want 3", len(ents))
	}
}

// dayReport is a day at 1 Hz: 86 400 epochs of eight members and one
// unknown load, with an excursion on one member in the afternoon.
func dayReport() *Report {
	r := &Report{Structure: "alder-creek", Title: "Alder Creek footbridge", ModelVersion: "sha256:9f2c41d07be3a8e5",
		From: t0.Truncate(24 * time.Hour), To: t0.Truncate(24 * time.Hour).Add(24 * time.Hour), CriticalValue: 3.29, Alpha: 0.001,
		Members: []string{"B2", "B3", "B4", "B5", "T2", "T3", "D2", "D5"}, Patterns: []Pattern{{Name: "crowd", Unit: "1"}}}
	const n = 86400
	r.Epochs = make([]Epoch, n)
	for i := 0; i < n; i++ {
		e := &r.Epochs[i]
		e.Time = r.From.Add(time.Duration(i) * time.Second)
		e.Members = make([]MemberResult, len(r.Members))
		daily := math.Sin(2 * math.Pi * float64(i) / n)
		for j := range e.Members {
			noise := math.Sin(float64(i)*1.7+float64(j)) * 300
			pred := 40000*math.Cos(float64(j)) + 8000*daily
			shift := 0.0
			if j == 6 && i > 50000 && i < 53600 {
				shift = 3000
			}
			e.Members[j] = MemberResult{Present: true, Measured: pred + noise + shift, Predicted: pred, SigmaResidual: 600, W: (noise + shift) / 600, Checkable: true}
		}
		e.Fit = Fit{ChiSquare: 6 + 2*math.Sin(float64(i)), DOF: 7, PValue: 0.5 + 0.4*math.Sin(float64(i)*0.3)}
		e.Loads = []LoadEstimate{{Present: true, Value: 0.3 + 0.2*daily, StdDev: 0.05}}
	}
	return r
}

func TestDaySizeBound(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a day of 1 Hz epochs (about 60 MB of CSV)")
	}
	dir := t.TempDir()
	if err := Write(dir, dayReport()); err != nil {
		t.Fatal(err)
	}
	st, err := os.Stat(filepath.Join(dir, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	csvSt, _ := os.Stat(filepath.Join(dir, EpochsFile))
	t.Logf("a day at 1 Hz, 8 members: index.html %d bytes, epochs.csv %d bytes", st.Size(), csvSt.Size())
	// Bound: a reduced plot has at most 2 points per pixel column (814) per
	// line; 8 members x (band + 2 lines + w) + loads + p-value stays well
	// under 4 MB. Common practice for a page to open quickly; our own limit.
	if st.Size() > 4<<20 {
		t.Errorf("index.html is %d bytes for a day at 1 Hz, want at most 4 MiB", st.Size())
	}
	b, _ := os.ReadFile(filepath.Join(dir, HTMLFile))
	parseHTML(t, b)
	if bytes.Contains(b, []byte(`data-row="`)) || !bytes.Contains(b, []byte("no alarm events")) {
		t.Errorf("timeline of an event-free day should say there are no alarm events")
	}
}

func TestReduceMinMax(t *testing.T) {
	r := &Report{From: t0, To: t0.Add(time.Duration(plotCs) * time.Second), Members: []string{}, Patterns: []Pattern{{Name: "crowd"}}}
	sum := newEpochSummary(periodRange(r), 3.29, 0, 1)
	// four epochs per pixel column alternating +v and -v, then a gap
	for i := 0; i < 40; i++ {
		v := float64(i / 4)
		if i%2 == 1 {
			v = -v
		}
		sum.add(Epoch{Time: t0.Add(time.Duration(i) * 250 * time.Millisecond), Loads: []LoadEstimate{{Present: true, Value: v}}})
	}
	sum.finish(nil)
	if sum.tr.step != int64(250*time.Millisecond) {
		t.Errorf("median step %v, want 250ms", time.Duration(sum.tr.step))
	}
	env := sum.loads[0].val
	for c := 0; c < 10; c++ {
		b := env[c]
		if b.n != 4 || b.lo != -float64(c) || b.hi != float64(c) {
			t.Errorf("column %d: n=%d lo=%v hi=%v, want 4, %v, %v", c, b.n, b.lo, b.hi, -float64(c), float64(c))
		}
	}
	for c := 10; c < plotCs; c++ {
		if env[c].n != 0 {
			t.Fatalf("column %d holds %d epochs, want none", c, env[c].n)
		}
	}
}

func TestTimeTicks(t *testing.T) {
	cases := []struct {
		span   time.Duration
		step   time.Duration
		layout string
	}{
		{6 * time.Second, time.Second, "15:04:05"},
		{10 * time.Minute, 2 * time.Minute, "15:04"},
		{24 * time.Hour, 6 * time.Hour, "15:04"},
		{7 * 24 * time.Hour, 24 * time.Hour, "01-02 15:04"},
	}
	for _, c := range cases {
		ticks, layout := timeTicks(t0.UnixNano(), t0.Add(c.span).UnixNano())
		if layout != c.layout || len(ticks) < 2 || time.Duration(ticks[1]-ticks[0]) != c.step {
			t.Errorf("span %v: layout %q, ticks %d, step %v; want %q, step %v", c.span, layout, len(ticks), time.Duration(ticks[1]-ticks[0]), c.layout, c.step)
		}
	}
}

func TestWriteRejectsMisalignedRows(t *testing.T) {
	cases := []struct {
		name  string
		edit  func(*Report)
		wants string
	}{
		{"member count", func(r *Report) { r.Epochs[2].Members = r.Epochs[2].Members[:2] }, "epoch 2 (2026-06-14T09:00:02.25Z) has 2 member results for 3 members"},
		{"load count", func(r *Report) { r.Epochs[0].Loads = nil }, "epoch 0 (2026-06-14T09:00:00.25Z) has 0 load estimates for 1 patterns"},
		{"order", func(r *Report) { r.Epochs[1].Time = t0.Add(-time.Hour) }, "epochs must be oldest first"},
		{"duplicate member", func(r *Report) { r.Members[2] = "B3" }, `member "B3" is listed twice`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r := smallReport()
			c.edit(r)
			err := Write(t.TempDir(), r)
			if err == nil || !strings.Contains(err.Error(), c.wants) {
				t.Errorf("error %v, want one containing %q", err, c.wants)
			}
		})
	}
	if err := Write(t.TempDir(), nil); err == nil {
		t.Errorf("nil report accepted")
	}
}

func ExampleWrite() {
	dir, _ := os.MkdirTemp("", "report")
	defer os.RemoveAll(dir)
	r := &Report{
		Structure: "alder-creek", Title: "Alder Creek footbridge", ModelVersion: "sha256:9f2c41d0",
		CriticalValue: 3.29, Alpha: 0.001, Members: []string{"D2"},
		Epochs: []Epoch{{
			Time:    time.Date(2026, 6, 14, 9, 0, 0, 0, time.UTC),
			Members: []MemberResult{{Present: true, Measured: -38400, Predicted: -38460, SigmaResidual: 598, W: 0.1, Checkable: true}},
			Fit:     Fit{ChiSquare: 0.01, DOF: 1, PValue: 0.92},
		}},
	}
	if err := Write(dir, r); err != nil {
		fmt.Println(err)
		return
	}
	b, _ := os.ReadFile(filepath.Join(dir, EpochsFile))
	fmt.Print(string(b))
	// Output:
	// time,chi_square,dof,p_value,rejected,D2_measured_n,D2_predicted_n,D2_sigma_residual_n,D2_w,D2_checkable
	// 2026-06-14T09:00:00Z,0.01,1,0.92,false,-38400,-38460,598,0.1,true
}

// BenchmarkWriteHTMLDay measures the HTML page alone for a day at 1 Hz
// (8 members, one unknown load).
func BenchmarkWriteHTMLDay(b *testing.B) {
	r := dayReport()
	sum := newEpochSummary(periodRange(r), r.CriticalValue, len(r.Members), len(r.Patterns))
	for _, e := range r.Epochs {
		sum.add(e)
	}
	sum.finish(nil)
	var buf bytes.Buffer
	for b.Loop() {
		buf.Reset()
		if err := writeHTML(&buf, r, sum); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(buf.Len()), "bytes/page")
}
