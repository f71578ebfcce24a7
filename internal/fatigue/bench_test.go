package fatigue

import (
	"math"
	"math/rand/v2"
	"syscall"
	"testing"
)

// trafficLike is a 200 Hz stress history (Pa) of the kind a gauge on a
// footbridge sees: a slow thermal drift, passages of a few seconds, a 2 Hz
// deck vibration and gauge noise.
func trafficLike(n int) []float64 {
	rng := rand.New(rand.NewPCG(1, 2))
	xs := make([]float64, n)
	for i := range xs {
		t := float64(i) / 200
		passage := 20e6 * math.Max(0, math.Sin(2*math.Pi*t/30))
		xs[i] = 5e6*math.Sin(2*math.Pi*t/3600) + passage + 2e6*math.Sin(2*math.Pi*2*t) + 0.2e6*rng.NormFloat64()
	}
	return xs
}

// cpuSeconds is the process's user+system CPU time (getrusage), so that a
// rate can be stated per second of CPU on a machine where other work
// competes for the cores (wall time then measures the contention).
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return math.NaN()
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

func benchCounter(b *testing.B, xs []float64) {
	var h Histogram
	var c Counter
	b.SetBytes(8)
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuSeconds()
	for done := 0; done < b.N; {
		k := min(len(xs), b.N-done)
		c.Add(xs[:k], &h)
		done += k
	}
	cpu := cpuSeconds() - cpu0
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds()/1e6, "Msamples/s")
	b.ReportMetric(float64(b.N)/cpu/1e6, "Msamples/cpu-s")
}

// BenchmarkRainflowTraffic counts a traffic-like 200 Hz history into a histogram.
func BenchmarkRainflowTraffic(b *testing.B) { benchCounter(b, trafficLike(1<<20)) }

// BenchmarkRainflowNoise is the worst case: white noise, a turning point at
// about two samples in three.
func BenchmarkRainflowNoise(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 4))
	xs := make([]float64, 1<<20)
	for i := range xs {
		xs[i] = 50e6 * rng.NormFloat64()
	}
	benchCounter(b, xs)
}
