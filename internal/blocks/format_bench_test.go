package blocks

import (
	"bufio"
	"compress/gzip"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/simtest"
	"trussmonitor/internal/structfile"
)

// hourBlocks splits readings by channel (first key) into hour blocks, as
// the store compacts them.
type hourBlocks map[string]map[int64][]Point

func (h hourBlocks) add(ch string, t int64, v float64) {
	if h[ch] == nil {
		h[ch] = map[int64][]Point{}
	}
	hour := t - t%int64(time.Hour)
	h[ch][hour] = append(h[ch][hour], Point{t, v})
}

// bridgeBlocks returns two hours of the 100-channel footbridge at 1 Hz from
// the simulator, printed with 8 significant digits or quantised at each
// unit's logger resolution (simulate.Options.Quantise).
func bridgeBlocks(b *testing.B, quantise bool) hourBlocks {
	st, err := structfile.LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		b.Fatal(err)
	}
	sm, err := sensors.LoadFile("../../testdata/footbridge/sensors-100.yaml", st)
	if err != nil {
		b.Fatal(err)
	}
	opt := simulate.DefaultOptions()
	opt.Duration = 2 * time.Hour
	opt.BadRate = 0
	opt.Quantise = quantise
	g, err := simulate.New(st, sm, opt)
	if err != nil {
		b.Fatal(err)
	}
	h := hourBlocks{}
	if err := simtest.Run(g, func(s simulate.Step) error {
		for _, r := range s.Readings {
			v := r.Value
			if !quantise {
				v = decimal(strconv.FormatFloat(v, 'g', 8, 64))
			}
			h.add(r.Channel, s.Time.UnixNano(), v)
		}
		return nil
	}); err != nil {
		b.Fatal(err)
	}
	return h
}

// recordedBlocks returns the recorded day (testdata/replay: 46 channels,
// one reading a minute, 8 significant digits), as it is or each value
// rounded to its unit's logger resolution.
func recordedBlocks(b *testing.B, quantise bool) hourBlocks {
	f, err := os.Open("../../testdata/replay/footbridge-day.csv.gz")
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		b.Fatal(err)
	}
	sc := bufio.NewScanner(zr)
	sc.Buffer(nil, 1<<20)
	var header []string
	decimals := map[int]int{}
	h := hourBlocks{}
	for line := 1; sc.Scan(); line++ {
		cells := strings.Split(sc.Text(), ",")
		switch line {
		case 1:
			header = cells
			continue
		case 2:
			for i := 1; i < len(cells); i++ {
				d, ok := simulate.LoggerResolution(cells[i])
				if !ok {
					b.Fatalf("recorded day line 2: unit %q has no logger resolution", cells[i])
				}
				decimals[i] = d
			}
			continue
		}
		t, err := time.Parse(time.RFC3339, cells[0])
		if err != nil {
			b.Fatalf("recorded day line %d: %v", line, err)
		}
		for i := 1; i < len(cells); i++ {
			v := decimal(cells[i])
			if quantise {
				v = simulate.Quantise(v, decimals[i])
			}
			h.add(header[i], t.UnixNano(), v)
		}
	}
	if err := sc.Err(); err != nil {
		b.Fatal(err)
	}
	return h
}

// BenchmarkFormatBytes encodes the same days in hour blocks per channel
// with format versions 1 and 2 and reports the payload bytes per reading of
// each ("v1", "v2") and their ratio: the bridge (2 h of 100 channels at
// 1 Hz) and the recorded day, each at 8 significant digits ("8sig") and at
// the loggers' fixed resolution ("res"). Every block is decoded and
// checked against its readings.
func BenchmarkFormatBytes(b *testing.B) {
	for b.Loop() {
		for _, day := range []struct {
			name  string
			get   func(*testing.B, bool) hourBlocks
			quant bool
		}{
			{"bridge-8sig", bridgeBlocks, false},
			{"bridge-res", bridgeBlocks, true},
			{"recorded-8sig", recordedBlocks, false},
			{"recorded-res", recordedBlocks, true},
		} {
			var n, v1, v2 int
			for _, hours := range day.get(b, day.quant) {
				for _, pts := range hours {
					b1, err := encodeV1(pts)
					if err != nil {
						b.Fatal(err)
					}
					b2, err := Encode(pts)
					if err != nil {
						b.Fatal(err)
					}
					for _, blk := range [][]byte{b1, b2} {
						got, err := Decode(blk)
						if err != nil {
							b.Fatal(err)
						}
						if err := same(pts, got); err != nil {
							b.Fatalf("%s version %d: %v", day.name, blk[0], err)
						}
					}
					n += len(pts)
					v1 += len(b1)
					v2 += len(b2)
				}
			}
			b.ReportMetric(float64(v1)/float64(n), day.name+"-v1-B/reading")
			b.ReportMetric(float64(v2)/float64(n), day.name+"-v2-B/reading")
			b.ReportMetric(float64(v1)/float64(v2), day.name+"-v1/v2")
		}
	}
}
