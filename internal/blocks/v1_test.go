package blocks

import (
	"encoding/binary"
	"math"
	"testing"
)

// encodeV1 is Encode of format version 1 (one decimal step for the whole
// block), kept to measure the versions side by side and to test that
// version 1 blocks still decode.
func encodeV1(pts []Point) ([]byte, error) {
	b, err := Encode(pts)
	if err != nil || b[0] != version {
		return b, err
	}
	out := []byte{1}
	out = binary.AppendUvarint(out, uint64(len(pts)))
	out = binary.AppendVarint(out, pts[0].Time)
	unit := timeUnit(pts)
	out = binary.AppendUvarint(out, unit)
	if len(pts) > 1 {
		out = binary.AppendUvarint(out, uint64(pts[1].Time-pts[0].Time)/unit)
	}
	ints, e, ok := decimals(pts)
	var w bitWriter
	encodeTimes(&w, pts, unit)
	if ok {
		out = append(out, schemeDecimal, byte(e))
		out = binary.AppendVarint(out, ints[0])
		encodeDecimals(&w, ints)
	} else {
		out = append(out, schemeXOR)
		out = binary.BigEndian.AppendUint64(out, math.Float64bits(pts[0].Value))
		encodeXOR(&w, pts)
	}
	return append(out, w.buf...), nil
}

// encodeDecimals bit-packs the zigzag differences of ints[1:] in frames.
func encodeDecimals(w *bitWriter, ints []int64) {
	diffs := make([]uint64, 0, frame)
	for i := 1; i < len(ints); i += frame {
		diffs = diffs[:0]
		width := uint(0)
		for j := i; j < min(i+frame, len(ints)); j++ {
			z := zigzag(ints[j] - ints[j-1])
			diffs = append(diffs, z)
			width = max(width, bitLen(z))
		}
		w.write(uint64(width), 7)
		for _, z := range diffs {
			w.write(z, width)
		}
	}
}

// TestVersions measures versions 1 and 2 on the same series and checks
// that both decode to them: version 2 is never larger but for the byte of
// significant digits in its header, and on values printed with 8
// significant digits that cross zero it saves the digits version 1 spent
// on the finest step.
func TestVersions(t *testing.T) {
	series := goldenSeries()
	for _, name := range []string{"strain-8sig", "strain-res", "frequency", "newtons", "irregular", "xor", "one"} {
		pts := series[name]
		b1, err := encodeV1(pts)
		if err != nil {
			t.Fatal(err)
		}
		b2, err := Encode(pts)
		if err != nil {
			t.Fatal(err)
		}
		for _, b := range [][]byte{b1, b2} {
			got, err := Decode(b)
			if err != nil {
				t.Fatalf("%s version %d: %v", name, b[0], err)
			}
			if err := same(pts, got); err != nil {
				t.Fatalf("%s version %d: %v", name, b[0], err)
			}
		}
		t.Logf("%-12s %4d readings: version 1 %5d bytes, version 2 %5d bytes (%.2f and %.2f bits a reading)",
			name, len(pts), len(b1), len(b2), 8*float64(len(b1))/float64(len(pts)), 8*float64(len(b2))/float64(len(pts)))
		if len(b2) > len(b1)+1 {
			t.Errorf("%s: version 2 takes %d bytes, version 1 %d", name, len(b2), len(b1))
		}
	}
}
