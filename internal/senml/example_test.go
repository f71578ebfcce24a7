package senml_test

import (
	"fmt"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/senml"
)

func ExampleDecode() {
	// A per-channel pack on shm/alder-creek/T3_a: no names, base time and
	// base unit carried to the second record.
	pack := `[{"bt":1796173200,"bu":"Hz","v":812.42},{"t":0.5,"v":812.45}]`
	recs, err := senml.Decode([]byte(pack), time.Now())
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range recs {
		fmt.Println(r.Time.Format(time.RFC3339Nano), r.Value, r.Unit)
	}
	// Output:
	// 2026-12-02T01:00:00Z 812.42 Hz
	// 2026-12-02T01:00:00.5Z 812.45 Hz
}

func ExampleError_Reason() {
	_, err := senml.Decode([]byte(`[{"n":"B2_a","v":1e-4},{"n":"B2_b","vs":"high"}]`), time.Now())
	if e, ok := err.(*senml.Error); ok {
		fmt.Println(e.Reason())
		fmt.Println(err)
	}
	// Output:
	// bad_record
	// senml: record 1: field "v": record has a string, boolean or data value but no numeric value; every channel of this monitor reports a number in "v"
}

// BenchmarkDecode decodes a pack of 50 named records (one logger scan of a
// footbridge).
func BenchmarkDecode(b *testing.B) {
	var sb strings.Builder
	sb.WriteString(`[{"bn":"","bt":1796173200,"n":"c0","u":"/","v":1.25e-4}`)
	for i := 1; i < 50; i++ {
		fmt.Fprintf(&sb, `,{"n":"c%d","u":"/","v":%g}`, i, 1e-4+float64(i)*1e-6)
	}
	sb.WriteString("]")
	pack := []byte(sb.String())
	now := time.Now()
	b.SetBytes(int64(len(pack)))
	for b.Loop() {
		if _, err := senml.Decode(pack, now); err != nil {
			b.Fatal(err)
		}
	}
}
