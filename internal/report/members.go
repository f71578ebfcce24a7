package report

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"trussmonitor/internal/capacity"
)

// MembersFile is the per-member summary written by Write when the report
// has member summaries.
const MembersFile = "members.csv"

// UtilisationCaution is printed beside every utilisation in the report.
const UtilisationCaution = capacity.Caution

// MemberSummary is one member's total axial state over the period (every
// member of the structure). Totals are the model's force in the gauges'
// zero state plus the measured change since zeroing, or the reconciled
// prediction for a member without a reporting gauge; forces in N, tension
// positive; NaN where a value does not apply.
type MemberSummary struct {
	Member string
	Gauged bool
	// Epochs is the number of fitted epochs with a state, MeasuredEpochs
	// those in which the member's gauges all reported.
	Epochs, MeasuredEpochs int
	// MinTotal and MaxTotal bound the total force over the period.
	MinTotal, MaxTotal float64
	// TensionResistance and CompressionResistance are the design
	// resistances (N; NaN without a design basis).
	TensionResistance, CompressionResistance float64
	// MaxUtilisation is the largest utilisation of the total force, at
	// MaxUtilisationTime; MaxPredictedUtilisation the largest of the
	// reconciled prediction.
	MaxUtilisation          float64
	MaxUtilisationTime      time.Time
	MaxPredictedUtilisation float64
}

func membersHeader() []string {
	return []string{"member", "gauged", "epochs", "epochs_measured", "total_min_n", "total_max_n",
		"resistance_tension_n", "resistance_compression_n", "utilisation_max", "utilisation_max_time", "utilisation_predicted_max"}
}

func writeMembersCSV(buf *bytes.Buffer, r *Report) error {
	w := csv.NewWriter(buf)
	if err := w.Write(membersHeader()); err != nil {
		return err
	}
	for _, m := range r.MemberSummaries {
		t := ""
		if !m.MaxUtilisationTime.IsZero() {
			t = timeText(m.MaxUtilisationTime)
		}
		if err := w.Write([]string{m.Member, boolText(m.Gauged), strconv.Itoa(m.Epochs), strconv.Itoa(m.MeasuredEpochs),
			floatText(m.MinTotal), floatText(m.MaxTotal), floatText(m.TensionResistance), floatText(m.CompressionResistance),
			floatText(m.MaxUtilisation), t, floatText(m.MaxPredictedUtilisation)}); err != nil {
			return err
		}
	}
	w.Flush()
	return w.Error()
}

// writeMemberTotals writes the HTML section of the members' total forces
// and utilisation, highest utilisation first.
func writeMemberTotals(sb *strings.Builder, r *Report) {
	if len(r.MemberSummaries) == 0 {
		return
	}
	sb.WriteString("<section id=\"member-totals\">\n<h2>Member forces: totals and utilisation</h2>\n")
	sb.WriteString("<p>Total force = the model's force in the state the gauges were zeroed under + the measured change since zeroing (the plots below show that change); members without a reporting gauge show the reconciled prediction. Tension positive.</p>\n")
	if r.Design != "" {
		fmt.Fprintf(sb, "<p>Design resistance per %s: tension by yield of the gross section, compression by flexural buckling about the weaker axis.</p>\n", esc(r.Design))
		fmt.Fprintf(sb, "<p class=\"caution\" id=\"utilisation-caution\">%s</p>\n", esc(UtilisationCaution))
	}
	list := append([]MemberSummary(nil), r.MemberSummaries...)
	sort.SliceStable(list, func(i, j int) bool {
		a, b := list[i].MaxUtilisation, list[j].MaxUtilisation
		if math.IsNaN(b) {
			return !math.IsNaN(a)
		}
		return a > b
	})
	sb.WriteString("<table id=\"member-totals-table\">\n<thead><tr><th>member</th><th>gauged</th><th>total force min</th><th>total force max</th>")
	if r.Design != "" {
		sb.WriteString("<th>resistance (tension / compression)</th><th>largest utilisation (estimate)</th><th>at (UTC)</th><th>largest predicted utilisation</th>")
	}
	sb.WriteString("</tr></thead>\n<tbody>\n")
	for _, m := range list {
		g := "no"
		if m.Gauged {
			g = fmt.Sprintf("yes (%d of %d epochs measured)", m.MeasuredEpochs, m.Epochs)
		}
		fmt.Fprintf(sb, "<tr data-member=\"%s\"><td>%s</td><td>%s</td><td class=\"num\">%s</td><td class=\"num\">%s</td>",
			esc(m.Member), esc(m.Member), esc(g), kNOrDash(m.MinTotal), kNOrDash(m.MaxTotal))
		if r.Design != "" {
			t := "–"
			if !m.MaxUtilisationTime.IsZero() {
				t = m.MaxUtilisationTime.UTC().Format("2006-01-02 15:04:05")
			}
			fmt.Fprintf(sb, "<td class=\"num\">%s / %s</td><td class=\"num\">%s</td><td>%s</td><td class=\"num\">%s</td>",
				kNOrDash(m.TensionResistance), kNOrDash(m.CompressionResistance), num(m.MaxUtilisation, 3), esc(t), num(m.MaxPredictedUtilisation, 3))
		}
		sb.WriteString("</tr>\n")
	}
	sb.WriteString("</tbody>\n</table>\n</section>\n")
}

func kNOrDash(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	return kN(v)
}
