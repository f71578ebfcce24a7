package pipeline

// The example structures and the logger simulator for the tests of the
// processor wired to the alarm rules and of the whole pipeline (the
// processor's own scenario tests are in package reconcile).

import (
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/simtest"
)

// scnFixture is an example structure with its sensor map.
type scnFixture struct {
	name string
	st   *model.Structure
	m    *model.Model
	sm   *sensors.Map
}

// loadScnFixture reads testdata/<name>/structure.yaml and sensors.yaml.
func loadScnFixture(tb testing.TB, name string) *scnFixture {
	tb.Helper()
	return loadScnFixtureWith(tb, name, nil)
}

// loadScnFixtureWith is loadScnFixture with the sensor map's text passed through
// edit (nil: unchanged) and read from a temporary copy.
func loadScnFixtureWith(tb testing.TB, name string, edit func(string) string) *scnFixture {
	tb.Helper()
	dir := "../../testdata/" + name + "/"
	path := dir + "sensors.yaml"
	if edit != nil {
		text, err := os.ReadFile(path)
		if err != nil {
			tb.Fatal(err)
		}
		path = filepath.Join(tb.TempDir(), "sensors.yaml")
		if err := os.WriteFile(path, []byte(edit(string(text))), 0o600); err != nil {
			tb.Fatal(err)
		}
	}
	mon, err := instrumented.Load(dir+"structure.yaml", path)
	if err != nil {
		tb.Fatal(err)
	}
	return &scnFixture{name: name, st: mon.Structure, m: mon.Model, sm: mon.Sensors}
}

// processor builds the fixture's Processor; a zero CauseSpan becomes
// alerts.DivergingFor, as in New.
func (f *scnFixture) processor(tb testing.TB, opt reconcile.ProcessorOptions) *reconcile.Processor {
	tb.Helper()
	if opt.CauseSpan == 0 {
		opt.CauseSpan = alerts.DivergingFor
	}
	p, err := reconcile.NewProcessor(f.m, f.sm, opt)
	if err != nil {
		tb.Fatal(err)
	}
	return p
}

// scnOptions returns simulator options: the default day with the given seed,
// length and rate, no bad messages (they only remove readings; test 6
// removes channels deliberately).
func scnOptions(tb testing.TB, seed uint64, d, rate time.Duration, faults ...string) simulate.Options {
	tb.Helper()
	opt := simulate.DefaultOptions()
	opt.Seed = seed
	opt.Duration = d
	opt.Rate = rate
	opt.BadRate = 0
	for _, s := range faults {
		ft, err := simulate.ParseFault(s)
		if err != nil {
			tb.Fatal(err)
		}
		opt.Faults = append(opt.Faults, ft)
	}
	return opt
}

// run simulates opt and calls fn with every step, the converted channel
// values (Convert's engineering values, keyed by channel) and the
// generator. fn may modify values before it evaluates them.
func (f *scnFixture) run(tb testing.TB, opt simulate.Options, fn func(g *simulate.Generator, s simulate.Step, values map[string]float64)) {
	tb.Helper()
	g, err := simulate.New(f.st, f.sm, opt)
	if err != nil {
		tb.Fatal(err)
	}
	err = simtest.Run(g, func(s simulate.Step) error {
		values := make(map[string]float64, len(s.Readings))
		for _, r := range s.Readings {
			v, err := f.sm.Convert(r.Channel, r.Value)
			if err != nil {
				return fmt.Errorf("%s: %w", s.Time.Format(time.RFC3339), err)
			}
			values[r.Channel] = v
		}
		fn(g, s, values)
		return nil
	})
	if err != nil {
		tb.Fatal(err)
	}
}

// gaugeChannels returns the gauge channels of a member.
func (f *scnFixture) gaugeChannels(member string) []string {
	var out []string
	for _, ch := range f.sm.Channels() {
		if ch.Kind.IsGauge() && ch.Member == member {
			out = append(out, ch.ID)
		}
	}
	return out
}

func scnMemberIndex(p *reconcile.Processor, name string) int {
	for i, n := range p.Gauged() {
		if n == name {
			return i
		}
	}
	return -1
}
