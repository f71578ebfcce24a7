package simulate_test

import (
	"fmt"
	"time"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/simulate"
)

func ExampleParseFault() {
	f, err := simulate.ParseFault("drift:B4_a:2h:50e-6/h")
	if err != nil {
		fmt.Println(err)
		return
	}
	start := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	fmt.Println(f.Kind, f.Target, f.Time(start).Format(time.RFC3339))
	fmt.Printf("%.4g strain per second\n", f.Size)
	// Output:
	// drift B4_a 2026-06-01T02:00:00Z
	// 1.389e-08 strain per second
}

func ExampleGenerator_All() {
	pair, err := instrumented.Load("../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml")
	if err != nil {
		fmt.Println(err)
		return
	}
	st, sm := pair.Structure, pair.Sensors
	opt := simulate.DefaultOptions()
	opt.Duration, opt.Rate, opt.BadRate = 3*time.Minute, time.Minute, 0
	f, _ := simulate.ParseFault("stiffness:D2:2m:0.3")
	opt.Faults = []simulate.Fault{f}
	g, err := simulate.New(st, sm, opt)
	if err != nil {
		fmt.Println(err)
		return
	}
	for step, err := range g.All() {
		if err != nil {
			fmt.Println(err)
			return
		}
		r := step.Readings[0]
		fmt.Println(step.Time.Format("15:04"), len(step.Readings), "readings, first", r.Channel, "in", r.Unit, "- faults active:", len(step.Truth.Faults))
	}
	// Output:
	// 00:00 46 readings, first B2_a in / - faults active: 0
	// 00:01 46 readings, first B2_a in / - faults active: 0
	// 00:02 46 readings, first B2_a in / - faults active: 1
}

// A strain logger reports 0.1 microstrain: a noisy strain of
// 1.234567891e-05 is sent as 1.23e-05, the float64 of the text
// "0.0000123". A reading that rounds to zero is sent as 0, never -0.
func ExampleQuantise() {
	d, ok := simulate.LoggerResolution("/")
	fmt.Println(d, ok)
	fmt.Println(simulate.Quantise(1.234567891e-05, d))
	fmt.Println(simulate.Quantise(-3e-9, d))
	_, ok = simulate.LoggerResolution("kPa")
	fmt.Println(ok)
	// Output:
	// 7 true
	// 1.23e-05
	// 0
	// false
}
