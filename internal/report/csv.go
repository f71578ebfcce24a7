package report

import (
	"bytes"
	"encoding/csv"
	"strconv"
	"strings"
)

// floatText writes x with strconv 'g' -1: the shortest text that parses
// back to the same float64 ("NaN", "+Inf", "-Inf" for non-finite values).
func floatText(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

func boolText(b bool) string {
	if b {
		return "true"
	}
	return "false"
}

// epochsHeader returns the fixed column order of epochs.csv: time, the fit,
// then per member (in Report.Members order) measured, predicted,
// sigma_residual, w, checkable, then per pattern value and std_dev.
func epochsHeader(r *Report) []string {
	h := []string{"time", "chi_square", "dof", "p_value", "rejected"}
	for _, m := range r.Members {
		h = append(h, m+"_measured_n", m+"_predicted_n", m+"_sigma_residual_n", m+"_w", m+"_checkable")
	}
	for _, p := range r.Patterns {
		h = append(h, p.Name+"_value", p.Name+"_std_dev")
	}
	return h
}

// maxCauses is the number of ranked causes written per event.
const maxCauses = 3

// eventsHeader is the fixed column order of events.csv: the event, the
// first maxCauses causes (with their size's standard deviation and their
// separability group, 0 when not grouped), the epoch the sizes are as of,
// and the unknown loads flagged when the alarm rose ("pattern z=..."
// joined by "; ").
func eventsHeader() []string {
	h := []string{"time", "rule", "subject", "kind", "w", "size", "size_unit", "message"}
	for i := 1; i <= maxCauses; i++ {
		p := "cause" + strconv.Itoa(i) + "_"
		h = append(h, p+"kind", p+"subject", p+"t", p+"size", p+"std", p+"unit", p+"group")
	}
	return append(h, "causes_at", "load_shifts")
}

func writeEventsCSV(buf *bytes.Buffer, r *Report) error {
	w := csv.NewWriter(buf)
	if err := w.Write(eventsHeader()); err != nil {
		return err
	}
	for _, e := range r.Events {
		row := []string{timeText(e.Time), string(e.Rule), e.Subject, string(e.Kind), floatText(e.W), floatText(e.Size), e.SizeUnit, e.Message}
		for i := 0; i < maxCauses; i++ {
			if i < len(e.Causes) {
				c := e.Causes[i]
				row = append(row, c.Kind.String(), c.Subject, floatText(c.T), floatText(c.Size), floatText(c.Std), c.Unit, strconv.Itoa(c.Group))
				continue
			}
			row = append(row, "", "", "", "", "", "", "")
		}
		at := ""
		if !e.CausesAt.IsZero() {
			at = timeText(e.CausesAt)
		}
		var shifts []string
		for _, l := range e.LoadShifts {
			shifts = append(shifts, l.Pattern+" z="+floatText(l.Z))
		}
		row = append(row, at, strings.Join(shifts, "; "))
		if err := w.Write(row); err != nil {
			return err
		}
	}
	w.Flush()
	return w.Error()
}
