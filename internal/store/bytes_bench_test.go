package store_test

import (
	"bufio"
	"compress/gzip"
	"context"
	"database/sql"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/simtest"
	"trussmonitor/internal/store"
	"trussmonitor/internal/structfile"
)

var storageHours = flag.Int("storage-hours", 2, "hours of the 100-channel footbridge at 1 Hz that BenchmarkStorageBytes stores")

// fileSize returns the size of a compact copy of the store (VACUUM INTO)
// and the path of the copy.
func fileSize(b *testing.B, st *store.Store, dir, name string) (int64, string) {
	b.Helper()
	path := filepath.Join(dir, name)
	if err := st.Backup(context.Background(), path); err != nil {
		b.Fatal(err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		b.Fatal(err)
	}
	return fi.Size(), path
}

// storageSize is what one data set costs: compact copies of the file with
// every reading in rows and after Compact moved them into blocks, and the
// sum of the block payloads alone (the rest of the blocks file is the
// SQLite row of each block, page fill and the schema).
type storageSize struct {
	readings            int64
	empty               int64 // the compact copy of the store before any reading
	rows, blocks, blobs int64
	blockRows           int64
}

// storeAndCompact commits the readings (time-ordered, one batch per time
// step) of structure name into a new store, compacts every closed block
// and measures the file.
func storeAndCompact(b *testing.B, name string, rs []store.Reading) storageSize {
	b.Helper()
	ctx := context.Background()
	dir := b.TempDir()
	db, err := store.Open(filepath.Join(dir, "monitor.db"), store.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	var sz storageSize
	sz.empty, _ = fileSize(b, db, dir, "empty.db")
	var last time.Time
	// One batch per time step, as a logger's packs arrive: every channel's
	// run in a batch is one reading, so the readings are keyed rows (the
	// "rows" figure), never staged runs (store.StageMinRun).
	for i, j := 0, 0; i < len(rs); i = j {
		for j = i + 1; j < len(rs) && rs[j].Time.Equal(rs[i].Time); j++ {
		}
		chunk := rs[i:j]
		res, err := db.Commit(ctx, store.Batch{Groups: []store.Group{{Structure: name, Readings: chunk}}})
		if err != nil {
			b.Fatal(err)
		}
		sz.readings += int64(res.Inserted[0])
		for _, r := range chunk {
			if r.Time.After(last) {
				last = r.Time
			}
		}
	}
	if sz.readings != int64(len(rs)) {
		b.Fatalf("stored %d of %d readings", sz.readings, len(rs))
	}
	sz.rows, _ = fileSize(b, db, dir, "rows.db")
	cs, err := db.Compact(ctx, last.Add(2*store.BlockSpan))
	if err != nil {
		b.Fatal(err)
	}
	if cs.Readings != sz.readings {
		b.Fatalf("compacted %d of %d readings", cs.Readings, sz.readings)
	}
	var path string
	sz.blocks, path = fileSize(b, db, dir, "blocks.db")
	copyDB, err := sql.Open("sqlite", path)
	if err != nil {
		b.Fatal(err)
	}
	defer copyDB.Close()
	if err := copyDB.QueryRowContext(ctx, `SELECT count(*), coalesce(sum(length(data)), 0) FROM reading_blocks`).Scan(&sz.blockRows, &sz.blobs); err != nil {
		b.Fatal(err)
	}
	return sz
}

// noiseBound returns the bits per reading that the noise of the readings
// allows a lossless code, as the mean over readings of
// log2(sigma / q * sqrt(2 pi e)): the differential entropy of Gaussian
// noise of standard deviation sigma (Cover and Thomas, "Elements of
// Information Theory", 2nd ed., Table 17.1 / eq. 8.9) less log2 q, the
// entropy of the noise read at resolution q (ibid., Theorem 8.3.1), valid
// for sigma well above q. sigma is estimated per channel from the second
// differences of successive readings (for white noise on a smooth signal
// their variance is 6 sigma^2), robustly: the median absolute second
// difference / 0.6745 / sqrt 6, so that pedestrians' steps do not count as
// noise. q is the reading's own resolution: 10^-decimals when the logger
// prints a fixed number of decimals, or the last of `digits` significant
// digits of the reading (0 for fixed decimals).
func noiseBound(rs []store.Reading, decimals map[string]int, digits int) float64 {
	byCh := map[string][]float64{}
	for _, r := range rs {
		byCh[r.Channel] = append(byCh[r.Channel], r.Value)
	}
	var bits float64
	var n int
	for ch, vs := range byCh {
		if len(vs) < 3 {
			continue
		}
		d2 := make([]float64, 0, len(vs)-2)
		for i := 1; i+1 < len(vs); i++ {
			d2 = append(d2, math.Abs(vs[i+1]-2*vs[i]+vs[i-1]))
		}
		slices.Sort(d2)
		sigma := d2[len(d2)/2] / 0.6745 / math.Sqrt(6)
		for _, v := range vs {
			var q float64
			if digits > 0 {
				if v == 0 {
					continue
				}
				q = math.Pow10(int(math.Floor(math.Log10(math.Abs(v)))) - digits + 1)
			} else {
				q = math.Pow10(-decimals[ch])
			}
			if sigma > 0 {
				bits += math.Max(0, math.Log2(sigma/q*math.Sqrt(2*math.Pi*math.E)))
			}
			n++
		}
	}
	return bits / float64(n)
}

// footbridgeDay returns storage-hours of the 100-channel footbridge at
// 1 Hz as the simulator gives them, plain or quantised at each unit's
// logger resolution, and the decimals of each channel.
func footbridgeDay(b *testing.B, quantise bool) (string, []store.Reading, map[string]int) {
	b.Helper()
	st, err := structfile.LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		b.Fatal(err)
	}
	sm, err := sensors.LoadFile("../../testdata/footbridge/sensors-100.yaml", st)
	if err != nil {
		b.Fatal(err)
	}
	opt := simulate.DefaultOptions()
	opt.Duration = time.Duration(*storageHours) * time.Hour
	opt.BadRate = 0
	opt.Quantise = quantise
	g, err := simulate.New(st, sm, opt)
	if err != nil {
		b.Fatal(err)
	}
	var rs []store.Reading
	decimals := map[string]int{}
	if err := simtest.Run(g, func(s simulate.Step) error {
		for _, r := range s.Readings {
			rs = append(rs, store.Reading{Channel: r.Channel, Time: s.Time, Value: r.Value})
			decimals[r.Channel], _ = simulate.LoggerResolution(r.Unit)
		}
		return nil
	}); err != nil {
		b.Fatal(err)
	}
	return st.Name, rs, decimals
}

// eightDigits returns the readings printed with 8 significant digits and
// parsed back, as a logger's CSV file carries them.
func eightDigits(rs []store.Reading) []store.Reading {
	out := make([]store.Reading, len(rs))
	for i, r := range rs {
		v, _ := strconv.ParseFloat(strconv.FormatFloat(r.Value, 'g', 8, 64), 64)
		out[i] = store.Reading{Channel: r.Channel, Time: r.Time, Value: v}
	}
	return out
}

// recordedDay reads the recorded day (testdata/replay, 46 channels, one
// reading a minute, 8 significant digits) and returns its readings, plain
// or each rounded to its unit's logger resolution, and the decimals of
// each channel.
func recordedDay(b *testing.B, quantise bool) (string, []store.Reading, map[string]int) {
	b.Helper()
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
	var rs []store.Reading
	decimals := map[string]int{}
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
					b.Fatalf("recorded day line 2: unit %q of %s has no logger resolution", cells[i], header[i])
				}
				decimals[header[i]] = d
			}
			continue
		}
		t, err := time.Parse(time.RFC3339, cells[0])
		if err != nil {
			b.Fatalf("recorded day line %d: %v", line, err)
		}
		for i := 1; i < len(cells); i++ {
			v, err := strconv.ParseFloat(cells[i], 64)
			if err != nil {
				b.Fatalf("recorded day line %d column %s: %v", line, header[i], err)
			}
			if quantise {
				v = simulate.Quantise(v, decimals[header[i]])
			}
			rs = append(rs, store.Reading{Channel: header[i], Time: t, Value: v})
		}
	}
	if err := sc.Err(); err != nil {
		b.Fatal(err)
	}
	return "alder-creek", rs, decimals
}

// BenchmarkStorageBytes stores the same days side by side and reports
// bytes per reading of compact copies of the file (VACUUM INTO): every
// reading in the keyed row table ("rows") and after Compact moved them into
// blocks ("blocks"), the block payloads alone ("blobs", the rest is SQLite's
// row of each block and page fill), the blocks file less the empty store's
// (its schema: 18 pages, 72 KiB, a fixed cost that a year of readings
// makes negligible, "net"), and the noise bound ("bound", bits per
// reading for the values, noiseBound). The days: storage-hours of the
// 100-channel footbridge at 1 Hz ("bridge"), and the recorded day
// (testdata/replay, "recorded"), each with values as the logger's CSV
// carries them, 8 significant digits ("8sig"), and at the fixed resolution
// of each unit ("res", simulate.LoggerResolution: Options.Quantise for the
// bridge, the recorded day's values rounded to it).
func BenchmarkStorageBytes(b *testing.B) {
	for b.Loop() {
		for _, day := range []struct {
			name  string
			get   func(*testing.B, bool) (string, []store.Reading, map[string]int)
			quant bool
		}{
			{"bridge-8sig", footbridgeDay, false},
			{"bridge-res", footbridgeDay, true},
			{"recorded-8sig", recordedDay, false},
			{"recorded-res", recordedDay, true},
		} {
			name, rs, decimals := day.get(b, day.quant)
			digits := 0
			if !day.quant {
				if strings.HasPrefix(day.name, "bridge") {
					rs = eightDigits(rs)
				}
				digits = 8
			}
			sz := storeAndCompact(b, name, rs)
			n := float64(sz.readings)
			bound := noiseBound(rs, decimals, digits)
			b.ReportMetric(float64(sz.rows)/n, day.name+"-rows-B/reading")
			b.ReportMetric(float64(sz.blocks)/n, day.name+"-blocks-B/reading")
			b.ReportMetric(float64(sz.blobs)/n, day.name+"-blobs-B/reading")
			b.ReportMetric(float64(sz.blocks-sz.empty)/n, day.name+"-net-B/reading")
			b.ReportMetric(bound/8, day.name+"-bound-B/reading")
			if testing.Verbose() {
				fmt.Printf("%s: %d readings, %d blocks; rows %.2f B, blocks %.2f B (%.2f B without the %d B empty file; %.0f B a block besides its payload), blobs %.2f B, value bound %.2f bits a reading\n",
					day.name, sz.readings, sz.blockRows, float64(sz.rows)/n, float64(sz.blocks)/n, float64(sz.blocks-sz.empty)/n, sz.empty,
					float64(sz.blocks-sz.empty-sz.blobs)/float64(sz.blockRows), float64(sz.blobs)/n, bound)
			}
		}
	}
}
