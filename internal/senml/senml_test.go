package senml

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"testing"
	"time"
)

var now = time.Date(2026, 12, 2, 1, 0, 0, 0, time.UTC)

// The packs below are the JSON examples of RFC 8428 section 5, reproduced
// from memory (the section 5.1.3 pack was compared with a copy quoted in a
// public SenML library's tests).
func TestRFCExamples(t *testing.T) {
	t0 := time.Unix(1276020076, 1000000).UTC() // 1.276020076001e+09 s
	tests := []struct {
		name    string
		payload string
		want    []Record
	}{
		{
			// RFC 8428 section 5.1.1, "Single Datapoint".
			name:    "5.1.1 single datapoint",
			payload: `[{"n":"urn:dev:ow:10e2073a01080063","u":"Cel","v":23.1}]`,
			want:    []Record{{Name: "urn:dev:ow:10e2073a01080063", Unit: "Cel", Value: 23.1, Time: now}},
		},
		{
			// RFC 8428 section 5.1.2, "Multiple Datapoints".
			name: "5.1.2 multiple datapoints",
			payload: `[{"bn":"urn:dev:ow:10e2073a01080063:","n":"voltage","u":"V","v":120.1},
			           {"n":"current","u":"A","v":1.2}]`,
			want: []Record{
				{Name: "urn:dev:ow:10e2073a01080063:voltage", Unit: "V", Value: 120.1, Time: now},
				{Name: "urn:dev:ow:10e2073a01080063:current", Unit: "A", Value: 1.2, Time: now},
			},
		},
		{
			// RFC 8428 section 5.1.3, "Multiple Measurements"; the
			// expected records are the section 5.1.4 "Resolved Data".
			name: "5.1.3 multiple measurements",
			payload: `[{"bn":"urn:dev:ow:10e2073a0108006:","bt":1.276020076001e+09,"bu":"A","bver":5,"n":"voltage","u":"V","v":120.1},
			  {"n":"current","t":-5,"v":1.2},
			  {"n":"current","t":-4,"v":1.3},
			  {"n":"current","t":-3,"v":1.4},
			  {"n":"current","t":-2,"v":1.5},
			  {"n":"current","t":-1,"v":1.6},
			  {"n":"current","v":1.7}]`,
			want: []Record{
				{Name: "urn:dev:ow:10e2073a0108006:voltage", Unit: "V", Value: 120.1, Time: t0},
				{Name: "urn:dev:ow:10e2073a0108006:current", Unit: "A", Value: 1.2, Time: t0.Add(-5 * time.Second)},
				{Name: "urn:dev:ow:10e2073a0108006:current", Unit: "A", Value: 1.3, Time: t0.Add(-4 * time.Second)},
				{Name: "urn:dev:ow:10e2073a0108006:current", Unit: "A", Value: 1.4, Time: t0.Add(-3 * time.Second)},
				{Name: "urn:dev:ow:10e2073a0108006:current", Unit: "A", Value: 1.5, Time: t0.Add(-2 * time.Second)},
				{Name: "urn:dev:ow:10e2073a0108006:current", Unit: "A", Value: 1.6, Time: t0.Add(-1 * time.Second)},
				{Name: "urn:dev:ow:10e2073a0108006:current", Unit: "A", Value: 1.7, Time: t0},
			},
		},
		{
			// RFC 8428 section 5.1.6, "Collection of Resources" style:
			// records without "n" take the base name, and base unit
			// and base time carry to later records (first records,
			// from memory).
			name: "5.1.6 records named by the base name",
			payload: `[{"bn":"urn:dev:ow:10e2073a01080063:","bt":1.320067464e+09,"bu":"%RH","v":20},
			  {"u":"lon","v":24.30621},
			  {"u":"lat","v":60.07965},
			  {"t":60,"v":20.3}]`,
			want: []Record{
				{Name: "urn:dev:ow:10e2073a01080063:", Unit: "%RH", Value: 20, Time: time.Unix(1320067464, 0).UTC()},
				{Name: "urn:dev:ow:10e2073a01080063:", Unit: "lon", Value: 24.30621, Time: time.Unix(1320067464, 0).UTC()},
				{Name: "urn:dev:ow:10e2073a01080063:", Unit: "lat", Value: 60.07965, Time: time.Unix(1320067464, 0).UTC()},
				{Name: "urn:dev:ow:10e2073a01080063:", Unit: "%RH", Value: 20.3, Time: time.Unix(1320067524, 0).UTC()},
			},
		},
		{
			// Base value carries (RFC 8428 section 4.1: bv is added to
			// each later record's v).
			name:    "base value",
			payload: `[{"bv":100,"v":1.5,"t":-1},{"v":-2}]`,
			want: []Record{
				{Value: 101.5, Time: now.Add(-time.Second)},
				{Value: 98, Time: now},
			},
		},
		{
			// Project topic scheme: a per-channel pack without names.
			name:    "unnamed per-channel pack",
			payload: `[{"bt":1790000000,"bu":"Hz","v":812.25},{"t":0.5,"v":812.5}]`,
			want: []Record{
				{Unit: "Hz", Value: 812.25, Time: time.Unix(1790000000, 0).UTC()},
				{Unit: "Hz", Value: 812.5, Time: time.Unix(1790000000, 500000000).UTC()},
			},
		},
		{
			// Unknown labels without "_" are extensions a receiver may
			// ignore (RFC 8428 section 4.4, from memory).
			name:    "ignored extension",
			payload: `[{"n":"a","v":1,"foo":{"x":1}}]`,
			want:    []Record{{Name: "a", Value: 1, Time: now}},
		},
		{name: "empty pack", payload: ` [] `, want: []Record{}},
		{
			// Escaped name and an underflowing value (reads as 0).
			name:    "escapes and underflow",
			payload: `[{"n":"B2\u005fa","v":1e-400}]`,
			want:    []Record{{Name: "B2_a", Value: 0, Time: now}},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := Decode([]byte(tc.payload), now)
			if err != nil {
				t.Fatalf("Decode: %v", err)
			}
			if len(got) != len(tc.want) {
				t.Fatalf("got %d records, want %d: %+v", len(got), len(tc.want), got)
			}
			for i := range got {
				g, w := got[i], tc.want[i]
				if g.Name != w.Name || g.Unit != w.Unit || math.Abs(g.Value-w.Value) > 1e-12 || !g.Time.Equal(w.Time) {
					t.Errorf("record %d = %+v, want %+v", i, g, w)
				}
			}
		})
	}
}

func TestDecodeErrors(t *testing.T) {
	tests := []struct {
		name, payload, reason string
		record                int
		field                 string
	}{
		{"empty", ``, ReasonMalformedJSON, -1, ""},
		{"object not array", `{"v":1}`, ReasonMalformedJSON, -1, ""},
		{"truncated", `[{"v":1}`, ReasonMalformedJSON, -1, ""},
		{"record not object", `[{"v":1}, 3]`, ReasonBadRecord, 1, ""},
		{"null record", `[{"v":1}, {"v":2}, null]`, ReasonBadRecord, 2, ""},
		{"array record", `[[{"v":1}]]`, ReasonBadRecord, 0, ""},
		{"v string", `[{"v":"1.5"}]`, ReasonBadRecord, 0, "v"},
		{"n number", `[{"n":5,"v":1}]`, ReasonBadRecord, 0, "n"},
		{"bt bool", `[{"bt":true,"v":1}]`, ReasonBadRecord, 0, "bt"},
		{"u null", `[{"u":null,"v":1}]`, ReasonBadRecord, 0, "u"},
		{"vb string", `[{"vb":"yes"}]`, ReasonBadRecord, 0, "vb"},
		// RFC 8428 section 5.1.5 style records with string and boolean
		// values: valid SenML, but no channel here takes them.
		{"string value only", `[{"n":"a","v":1},{"n":"label","vs":"Machine Room"}]`, ReasonBadRecord, 1, "v"},
		{"bool value only", `[{"n":"open","vb":false}]`, ReasonBadRecord, 0, "v"},
		{"sum only", `[{"n":"e","s":12}]`, ReasonBadRecord, 0, "v"},
		{"no value", `[{"n":"e"}]`, ReasonBadRecord, 0, "v"},
		{"two values", `[{"n":"e","v":1,"vs":"x"}]`, ReasonBadRecord, 0, ""},
		{"must understand", `[{"n":"a","v":1,"new_":1}]`, ReasonUnsupportedField, 0, "new_"},
		{"newer version", `[{"bver":11,"v":1}]`, ReasonUnsupportedField, 0, "bver"},
		{"fractional version", `[{"bver":5.5,"v":1}]`, ReasonBadRecord, 0, "bver"},
		{"name starts with dash", `[{"n":"-a","v":1}]`, ReasonBadName, 0, "n"},
		{"name with space", `[{"bn":"dev ","n":"a","v":1}]`, ReasonBadName, 0, "n"},
		{"name with plus", `[{"n":"a+b","v":1}]`, ReasonBadName, 0, "n"},
		{"overflow number", `[{"v":1e400}]`, ReasonNotFinite, 0, "v"},
		{"overflow sum", `[{"bv":1.7e308,"v":1.7e308}]`, ReasonNotFinite, 0, "v"},
		{"time after 9999", `[{"t":1e12,"v":1}]`, ReasonBadTime, 0, "t"},
		{"relative time before 1970", `[{"t":-1e10,"v":1}]`, ReasonBadTime, 0, "t"},
		{"negative update time", `[{"ut":-1,"v":1}]`, ReasonBadTime, 0, "ut"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			recs, err := Decode([]byte(tc.payload), now)
			if err == nil {
				t.Fatalf("Decode accepted %s: %+v", tc.payload, recs)
			}
			if recs != nil {
				t.Errorf("records returned with an error: %+v", recs)
			}
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %T is not *Error: %v", err, err)
			}
			if e.Reason() != tc.reason || e.Record != tc.record || e.Field != tc.field {
				t.Errorf("got reason %q record %d field %q (%v), want %q %d %q", e.Reason(), e.Record, e.Field, err, tc.reason, tc.record, tc.field)
			}
		})
	}
}

// FuzzDecode checks that Decode never panics, that every error carries one
// of the documented reasons, and that accepted records are finite, have
// valid names and times in range.
func FuzzDecode(f *testing.F) {
	f.Add([]byte(`[{"bn":"x:","bt":1.7e9,"bu":"Hz","v":800},{"n":"y","t":-1,"v":801}]`))
	reasons := map[string]bool{ReasonMalformedJSON: true, ReasonBadRecord: true, ReasonBadName: true,
		ReasonBadTime: true, ReasonNotFinite: true, ReasonUnsupportedField: true}
	f.Fuzz(func(t *testing.T, payload []byte) {
		recs, err := Decode(payload, now)
		if err != nil {
			var e *Error
			if !errors.As(err, &e) || !reasons[e.Reason()] {
				t.Fatalf("error without a documented reason: %v", err)
			}
			if recs != nil {
				t.Fatalf("records returned with error")
			}
			return
		}
		for i, r := range recs {
			if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
				t.Fatalf("record %d: value %v", i, r.Value)
			}
			if checkName(i, r.Name) != nil {
				t.Fatalf("record %d: bad name %q accepted", i, r.Name)
			}
			if r.Time.Year() < 1970 || r.Time.Year() > 9999 {
				t.Fatalf("record %d: time %v out of range", i, r.Time)
			}
		}
	})
}

// FuzzFastPath checks the hand-written fast path against the general
// decoder (encoding/json, the reference): whenever the fast path accepts a
// pack, its records are exactly the general decoder's (names, units, value
// bits, times), and Decode as a whole gives the general decoder's result and
// error text for every input.
func FuzzFastPath(f *testing.F) {
	for _, s := range []string{
		`[{"bn":"x:","bt":1.7e9,"bu":"Hz","v":800},{"n":"y","t":-1,"v":801}]`,
		`[{"bn":"","bt":1780000000.25,"bu":"/","n":"g00","v":7},{"n":"g01","v":-7.5e-3},{"n":"g02","v":0}]`,
		`[{"bt":1780000000,"u":"/","v":1}]`,
		` [ {"v" : 1 , "t" : 2 } ] `,
		`[{"v":1,"v":2}]`,
		`[{"v":01}]`,
		`[{"v":1e400}]`,
		`[{"n":"a\u0062","v":1}]`,
		`[{"bver":10,"v":1}]`,
		`[{"v":1},null]`,
		`[{"bv":1e308,"v":1e308}]`,
		`[]`,
		`[{}]`,
		`[{"n":"-x","v":1}]`,
		`[{"v":-0,"t":-0.5}]`,
		`[{"v":1}] x`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, payload []byte) {
		trimmed := bytes.TrimSpace(payload)
		if len(trimmed) == 0 || trimmed[0] != '[' {
			return
		}
		want, wantErr := decodeGeneral(trimmed, now)
		if fast, ok := decodeFast(trimmed, now); ok {
			if wantErr != nil {
				t.Fatalf("fast path accepted a pack the general decoder refuses (%v): %q", wantErr, payload)
			}
			sameRecords(t, fast, want)
		}
		got, err := Decode(payload, now)
		switch {
		case (err == nil) != (wantErr == nil):
			t.Fatalf("Decode error %v, general decoder %v", err, wantErr)
		case err != nil && err.Error() != wantErr.Error():
			t.Fatalf("Decode error %q, general decoder %q", err, wantErr)
		case err == nil:
			sameRecords(t, got, want)
		}
	})
}

func sameRecords(t *testing.T, got, want []Record) {
	t.Helper()
	if len(got) != len(want) || (got == nil) != (want == nil) {
		t.Fatalf("got %d records (nil %v), want %d (nil %v)", len(got), got == nil, len(want), want == nil)
	}
	for i := range got {
		g, w := got[i], want[i]
		if g.Name != w.Name || g.Unit != w.Unit || math.Float64bits(g.Value) != math.Float64bits(w.Value) ||
			!g.Time.Equal(w.Time) || g.Time.Location() != w.Time.Location() {
			t.Fatalf("record %d: got %+v, want %+v", i, g, w)
		}
	}
}

// loggerPack is a pack of n readings of one time in the shape a logger
// sends on shm/<structure> (base time and unit, channels named by n).
func loggerPack(n int) []byte {
	b := []byte(`[{"bn":"","bt":1780000000.125,"bu":"/","n":"g00","v":-12.5}`)
	for c := 1; c < n; c++ {
		b = fmt.Appendf(b, `,{"n":"g%02d","v":%d.25}`, c, c*37)
	}
	return append(b, ']')
}

// TestFastPathTaken checks that the logger's usual packs take the fast path
// (the fuzz test shows it agrees with the general decoder where it does).
func TestFastPathTaken(t *testing.T) {
	for _, p := range [][]byte{loggerPack(1), loggerPack(50), []byte(`[{"bt":1780000000,"u":"/","v":3}]`), []byte(`[]`)} {
		if _, ok := decodeFast(bytes.TrimSpace(p), now); !ok {
			t.Errorf("fast path refused %s", p)
		}
	}
}

// BenchmarkDecodePack compares the fast path with the general decoder on a
// pack of 50 readings; one op is one pack.
func BenchmarkDecodePack(b *testing.B) {
	p := loggerPack(50)
	b.Run("Decode", func(b *testing.B) {
		for range b.N {
			if _, err := Decode(p, now); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("general", func(b *testing.B) {
		for range b.N {
			if _, err := decodeGeneral(p, now); err != nil {
				b.Fatal(err)
			}
		}
	})
}
