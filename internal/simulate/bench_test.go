package simulate

import (
	"testing"
	"time"
)

// BenchmarkFootbridgeHour generates one hour of the footbridge at one
// reading per channel per second (3600 steps, 46 channels).
func BenchmarkFootbridgeHour(b *testing.B) {
	opt := DefaultOptions()
	opt.Duration = time.Hour
	opt.Start = time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC)
	g := newGen(b, opt, "stiffness:D2:30m:0.3")
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for _, err := range g.All() {
			if err != nil {
				b.Fatal(err)
			}
		}
	}
	b.ReportMetric(float64(g.Steps()*len(g.Channels()))*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}
