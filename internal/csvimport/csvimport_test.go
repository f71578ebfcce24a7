package csvimport

import (
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"
)

func collect(t *testing.T, in string) ([]Record, Stats, error) {
	t.Helper()
	var out []Record
	st, err := Read(strings.NewReader(in), func(r Record) error { out = append(out, r); return nil })
	return out, st, err
}

func TestRead(t *testing.T) {
	in := "\ufeff# Alder Creek logger export\n" +
		"time,B2_a,pad_1,temp_top\n" +
		"unit,/,N,Cel\n" +
		"2026-12-02T01:00:00Z,1.25e-4,1503,14.9\n" +
		"\n" +
		"# a comment between rows\n" +
		"1796173200.25,,1498.5,15\n" +
		"2026-12-02T02:00:00.125+01:00, -3e-6 ,,NaN\n"
	recs, st, err := collect(t, in)
	if err != nil {
		t.Fatal(err)
	}
	if st.Rows != 3 || st.Readings != 7 || st.Empty != 2 || st.Channels != 3 {
		t.Errorf("stats %+v", st)
	}
	t0 := time.Date(2026, 12, 2, 1, 0, 0, 0, time.UTC)
	want := []Record{
		{Line: 4, Channel: "B2_a", Unit: "/", Time: t0, Value: 1.25e-4},
		{Line: 4, Channel: "pad_1", Unit: "N", Time: t0, Value: 1503},
		{Line: 4, Channel: "temp_top", Unit: "Cel", Time: t0, Value: 14.9},
		{Line: 7, Channel: "pad_1", Unit: "N", Time: time.Unix(1796173200, 250000000).UTC(), Value: 1498.5},
		{Line: 7, Channel: "temp_top", Unit: "Cel", Time: time.Unix(1796173200, 250000000).UTC(), Value: 15},
		{Line: 8, Channel: "B2_a", Unit: "/", Time: t0.Add(125 * time.Millisecond), Value: -3e-6},
	}
	for i, w := range want {
		g := recs[i]
		if g.Line != w.Line || g.Channel != w.Channel || g.Unit != w.Unit || !g.Time.Equal(w.Time) || g.Value != w.Value {
			t.Errorf("record %d = %+v, want %+v", i, g, w)
		}
	}
	if last := recs[len(recs)-1]; last.Channel != "temp_top" || !math.IsNaN(last.Value) {
		t.Errorf("NaN cell not passed on for validation: %+v", last)
	}
}

func TestReadWithoutUnitRow(t *testing.T) {
	recs, _, err := collect(t, "time,a\n1796173200,1\n-1.5,2\n")
	if err != nil {
		t.Fatal(err)
	}
	if recs[0].Unit != "" || !recs[1].Time.Equal(time.Unix(-2, 500000000)) {
		t.Errorf("%+v", recs)
	}
}

func TestReadErrors(t *testing.T) {
	tests := []struct {
		name, in   string
		line, col  int
		contains   string
		readingsOK int
	}{
		{"empty", "", 1, 0, "empty file", 0},
		{"no time column", "ts,a\n", 1, 1, "must start with \"time\"", 0},
		{"only time", "time\n", 1, 1, "must start", 0},
		{"bad channel", "time,a,b c\n", 1, 3, "channel id", 0},
		{"duplicate channel", "time,a,a\n", 1, 3, "each channel once", 0},
		{"short row", "time,a,b\n1796173200,1\n", 2, 0, "2 cells", 0},
		{"bad value", "time,a,b\n1796173200,1,x1\n", 2, 3, "not a number", 1},
		{"bad timestamp", "time,a\n2026-13-02T00:00:00Z,1\n", 2, 1, "RFC 3339", 0},
		{"too many decimals", "time,a\n1796173200.1234567891,1\n", 2, 1, "9 decimals", 0},
		{"quote", "time,a\n1796173200,\"1\n", 2, 0, "malformed CSV", 0},
		{"later bad row", "time,a\n1796173200,1\n1796173201,2\n1796173202,?\n", 4, 2, "not a number", 2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, st, err := collect(t, tc.in)
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %v is not *Error", err)
			}
			if e.Line != tc.line || (tc.col > 0 && e.Column != tc.col) || !strings.Contains(err.Error(), tc.contains) {
				t.Errorf("got %q (line %d col %d), want line %d col %d containing %q", err, e.Line, e.Column, tc.line, tc.col, tc.contains)
			}
			if st.Readings != tc.readingsOK {
				t.Errorf("readings before the error %d, want %d", st.Readings, tc.readingsOK)
			}
		})
	}
}

func TestCallbackError(t *testing.T) {
	stop := errors.New("store full")
	n := 0
	st, err := Read(strings.NewReader("time,a,b\n1796173200,1,2\n"), func(Record) error {
		n++
		if n == 2 {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || st.Readings != 1 || !strings.Contains(err.Error(), "line 2, column 3 (b)") {
		t.Errorf("err %v, stats %+v", err, st)
	}
}

func FuzzRead(f *testing.F) {
	f.Add([]byte("time,a,b\nunit,/,Hz\n2026-12-02T01:00:00Z,1e-4,800\n1796173200.5,,801\n"))
	f.Add([]byte("time,a\n1796173200,1\n"))
	f.Add([]byte("time,a\n\"x\"\"\",1\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		lines := 1 + strings.Count(string(data), "\n")
		st, err := Read(strings.NewReader(string(data)), func(r Record) error {
			if r.Line < 1 || r.Line > lines || !validChannel(r.Channel) {
				t.Fatalf("bad record %+v", r)
			}
			return nil
		})
		if err != nil {
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %T without place: %v", err, err)
			}
		}
		if st.Readings < 0 || st.Empty < 0 {
			t.Fatal("negative counts")
		}
	})
}

// BenchmarkRead reads 10000 rows of 10 channels.
func BenchmarkRead(b *testing.B) {
	var sb strings.Builder
	sb.WriteString("time,c0,c1,c2,c3,c4,c5,c6,c7,c8,c9\n")
	for i := 0; i < 10000; i++ {
		sb.WriteString(strconv.Itoa(1796173200 + i))
		for j := 0; j < 10; j++ {
			sb.WriteString(",1.2345e-4")
		}
		sb.WriteString("\n")
	}
	data := sb.String()
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := Read(strings.NewReader(data), func(Record) error { return nil }); err != nil {
			b.Fatal(err)
		}
	}
}
