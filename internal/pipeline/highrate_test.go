package pipeline

import (
	"context"
	"fmt"
	"regexp"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/simtest"
	"trussmonitor/internal/store"
)

// countSink counts the results of epochs and their missing channels.
type countSink struct {
	epochs, withMissing int
}

func (c *countSink) Epoch(r *Result) {
	c.epochs++
	if len(r.MissingChannels) > 0 {
		c.withMissing++
	}
}

// TestHighRateLogger: the footbridge's logger sampling every channel at 1,
// 10 and 50 Hz (sample_rate declared in the sensor map), 1 s epochs, fed
// through the pipeline as the service feeds it. Every reading joins its
// epoch (none late) and every epoch closes complete. Before the declared
// rate reached the assembler, an epoch closed when each channel had sent
// one reading and the other 49 of each second counted late (the fault
// trials stored 737,380 readings at 50 Hz, 722,614 of them late).
func TestHighRateLogger(t *testing.T) {
	for _, hz := range []int{1, 10, 50} {
		t.Run(fmt.Sprintf("%d Hz", hz), func(t *testing.T) {
			declare := func(text string) string {
				// Every channel mapping starts with "  - id: "; add the rate
				// as the channel's first field after its id.
				head, chans, ok := strings.Cut(text, "\nchannels:\n")
				if !ok {
					t.Fatal("footbridge sensor map has no channels list")
				}
				re := regexp.MustCompile(`(?m)^  - id: (\S+)\n`)
				return head + "\nchannels:\n" + re.ReplaceAllString(chans, fmt.Sprintf("  - id: $1\n    sample_rate: %d Hz\n", hz))
			}
			f := loadScnFixtureWith(t, "footbridge", declare)
			for _, ch := range f.sm.Channels() {
				if ch.SampleRate != float64(hz) {
					t.Fatalf("channel %s: sample rate %v Hz, want %d", ch.ID, ch.SampleRate, hz)
				}
			}
			sink := &countSink{}
			p, err := New(f.m, f.sm, Config{Window: time.Second, MaxLateness: 2 * time.Second}, sink)
			if err != nil {
				t.Fatal(err)
			}
			const seconds = 8
			opt := scnOptions(t, 21, seconds*time.Second, time.Second/time.Duration(hz))
			g, err := simulate.New(f.st, f.sm, opt)
			if err != nil {
				t.Fatal(err)
			}
			fed := 0
			if err := simtest.Run(g, func(s simulate.Step) error {
				rs := make([]store.Reading, 0, len(s.Readings))
				for _, r := range s.Readings {
					rs = append(rs, store.Reading{Channel: r.Channel, Time: s.Time, Value: r.Value})
				}
				fed += len(rs)
				p.Feed(context.Background(), rs)
				return nil
			}); err != nil {
				t.Fatal(err)
			}
			p.Flush(context.Background())
			st := p.Stats()
			if st.Assembler.Late != 0 {
				t.Errorf("%d of %d readings counted late, want 0", st.Assembler.Late, fed)
			}
			if st.Assembler.Readings != int64(fed) {
				t.Errorf("%d of %d readings assembled", st.Assembler.Readings, fed)
			}
			if sink.epochs != seconds || st.Assembler.Incomplete != 0 {
				t.Errorf("%d epochs (%d incomplete), want %d complete", sink.epochs, st.Assembler.Incomplete, seconds)
			}
		})
	}
}
