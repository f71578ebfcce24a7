package report

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestMemberSummaries: members.csv lists every member with its totals and
// utilisation, highest first in the HTML with the utilisation caution; a
// report without summaries writes no members.csv, and one without a
// design basis shows totals only, with no utilisation column or caution.
func TestMemberSummaries(t *testing.T) {
	nan := math.NaN()
	r := smallReport()
	r.Design = "EN 1993-1-1"
	r.MemberSummaries = []MemberSummary{
		{Member: "B3", Gauged: true, Epochs: 6, MeasuredEpochs: 6, MinTotal: 52140.5, MaxTotal: 52325.5, TensionResistance: 2.659e6, CompressionResistance: 2.4e6, MaxUtilisation: 0.0197, MaxUtilisationTime: t0, MaxPredictedUtilisation: 0.0196},
		{Member: "D2", Gauged: true, Epochs: 6, MeasuredEpochs: 5, MinTotal: 25000, MaxTotal: 91190, TensionResistance: 1.0011e6, CompressionResistance: 7.1e5, MaxUtilisation: 0.0911, MaxUtilisationTime: t0.Add(5e9), MaxPredictedUtilisation: 0.0667},
		{Member: "U9", Epochs: 6, MinTotal: nan, MaxTotal: nan, TensionResistance: 1e6, CompressionResistance: 5e5, MaxUtilisation: nan, MaxPredictedUtilisation: nan},
	}
	dir := t.TempDir()
	if err := Write(dir, r); err != nil {
		t.Fatal(err)
	}
	csv, err := os.ReadFile(filepath.Join(dir, MembersFile))
	if err != nil {
		t.Fatal(err)
	}
	want := "member,gauged,epochs,epochs_measured,total_min_n,total_max_n,resistance_tension_n,resistance_compression_n,utilisation_max,utilisation_max_time,utilisation_predicted_max\n" +
		"B3,true,6,6,52140.5,52325.5,2.659e+06,2.4e+06,0.0197,2026-06-14T09:00:00Z,0.0196\n" +
		"D2,true,6,5,25000,91190,1.0011e+06,710000,0.0911,2026-06-14T09:00:05Z,0.0667\n" +
		"U9,false,6,0,NaN,NaN,1e+06,500000,NaN,,NaN\n"
	if string(csv) != want {
		t.Errorf("members.csv:\n%s\nwant:\n%s", csv, want)
	}
	html, _ := os.ReadFile(filepath.Join(dir, HTMLFile))
	h := string(html)
	if !strings.Contains(h, UtilisationCaution) || !strings.Contains(h, "largest utilisation (estimate)") {
		t.Errorf("index.html lacks the utilisation caution or column")
	}
	sec := h[strings.Index(h, `id="member-totals-table"`):]
	if d2, b3 := strings.Index(sec, `<tr data-member="D2"><td>D2</td><td>yes (5 of 6`), strings.Index(sec, `<tr data-member="B3"><td>B3</td>`); d2 < 0 || b3 < 0 || d2 > b3 {
		t.Errorf("member totals not ordered by utilisation (D2 at %d, B3 at %d)", d2, b3)
	}

	r.Design = ""
	dir = t.TempDir()
	if err := Write(dir, r); err != nil {
		t.Fatal(err)
	}
	html, _ = os.ReadFile(filepath.Join(dir, HTMLFile))
	if h := string(html); strings.Contains(h, UtilisationCaution) || strings.Contains(h, "largest utilisation") || !strings.Contains(h, "Member forces: totals") {
		t.Errorf("without a design basis the report shows a utilisation, or no totals")
	}
	if _, err := os.Stat(filepath.Join(writeSmall(t), MembersFile)); !os.IsNotExist(err) {
		t.Errorf("members.csv written without member summaries: %v", err)
	}
}
