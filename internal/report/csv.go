package report

import (
	"bytes"
	"encoding/csv"
	"strconv"
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

// eventsHeader is the fixed column order of events.csv.
func eventsHeader() []string {
	h := []string{"time", "rule", "subject", "kind", "w", "size", "size_unit", "message"}
	for i := 1; i <= maxCauses; i++ {
		p := "cause" + strconv.Itoa(i) + "_"
		h = append(h, p+"kind", p+"subject", p+"t", p+"size", p+"unit")
	}
	return h
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
				row = append(row, c.Kind.String(), c.Subject, floatText(c.T), floatText(c.Size), c.Unit)
				continue
			}
			row = append(row, "", "", "", "", "")
		}
		if err := w.Write(row); err != nil {
			return err
		}
	}
	w.Flush()
	return w.Error()
}
