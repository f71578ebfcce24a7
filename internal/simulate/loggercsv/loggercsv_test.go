package loggercsv

import (
	"bytes"
	"iter"
	"math"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/csvimport"
	"trussmonitor/internal/simulate"
)

func twoSteps() iter.Seq2[simulate.Step, error] {
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 500, time.UTC)
	return func(yield func(simulate.Step, error) bool) {
		s := simulate.Step{Time: t0, Readings: []simulate.LoggerValue{{Channel: "B2_a", Unit: "/", Value: -1.2345678912e-5}, {Channel: "pad_1", Unit: "N", Value: 735.25}}}
		if !yield(s, nil) {
			return
		}
		s = simulate.Step{Time: t0.Add(time.Minute),
			Readings: []simulate.LoggerValue{{Channel: "pad_1", Unit: "N", Value: 2.5}},
			Bad:      []simulate.LoggerValue{{Channel: "B2_a", Unit: "/", Value: math.NaN(), Defect: simulate.DefectNaN}, {Channel: "ghost_1", Unit: "N", Value: 1, Defect: simulate.DefectUnknownChannel}}}
		yield(s, nil)
	}
}

// TestRoundTrip writes two steps and reads them back with the project's
// logger CSV reader.
func TestRoundTrip(t *testing.T) {
	var buf bytes.Buffer
	cols := []Column{{"B2_a", "/"}, {"pad_1", "N"}}
	n, err := WriteAll(&buf, cols, 0, twoSteps())
	if err != nil || n != 2 {
		t.Fatalf("wrote %d rows: %v", n, err)
	}
	want := "time,B2_a,pad_1\nunit,/,N\n2026-06-01T00:00:00.0000005Z,-1.2345679e-05,735.25\n2026-06-01T00:01:00.0000005Z,NaN,2.5\n"
	if buf.String() != want {
		t.Fatalf("file\n%s\nwant\n%s", buf.String(), want)
	}
	var recs []csvimport.Record
	st, err := csvimport.Read(strings.NewReader(buf.String()), func(r csvimport.Record) error {
		recs = append(recs, r)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if st.Rows != 2 || len(recs) != 4 {
		t.Fatalf("read %d rows, %d records", st.Rows, len(recs))
	}
	if r := recs[0]; r.Channel != "B2_a" || r.Unit != "/" || r.Value != -1.2345679e-05 || r.Time.Nanosecond() != 500 {
		t.Fatalf("first record %+v", r)
	}
	if !math.IsNaN(recs[2].Value) {
		t.Fatalf("NaN cell read as %v", recs[2].Value)
	}
}

func TestGzipDeterministic(t *testing.T) {
	var a, b bytes.Buffer
	cols := []Column{{"B2_a", "/"}, {"pad_1", "N"}}
	if _, err := WriteGzip(&a, cols, 0, twoSteps()); err != nil {
		t.Fatal(err)
	}
	if _, err := WriteGzip(&b, cols, 0, twoSteps()); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Fatal("two gzip writes of the same steps differ")
	}
}

func TestDuplicateColumn(t *testing.T) {
	if _, err := NewWriter(&bytes.Buffer{}, []Column{{"a", "/"}, {"a", "/"}}, 0); err == nil {
		t.Fatal("duplicate column accepted")
	}
}
