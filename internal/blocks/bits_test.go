package blocks

import (
	"math/rand/v2"
	"testing"
)

// TestBitReader writes random fields (fixed widths 0..64 and unary runs
// with and without their ending '0') and reads them back, so that the
// reader's 8-byte fast path, its byte-wise slow path near the end of the
// buffer and the unary run across byte boundaries agree with the writer.
func TestBitReader(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 37))
	type field struct {
		unary bool
		v     uint64
		n     uint // width, or the unary limit
	}
	for round := 0; round < 300; round++ {
		var w bitWriter
		var fs []field
		for k := rng.IntN(40); k >= 0; k-- {
			if rng.IntN(3) == 0 {
				limit := uint(1 + rng.IntN(30))
				q := uint64(rng.IntN(int(limit) + 1)) // q == limit: no ending '0'
				for i := uint64(0); i < q; i++ {
					w.write(1, 1)
				}
				if q < uint64(limit) {
					w.write(0, 1)
				}
				fs = append(fs, field{true, q, limit})
				continue
			}
			n := uint(rng.IntN(65))
			v := rng.Uint64()
			if n < 64 {
				v &= 1<<n - 1
			}
			w.write(v, n)
			fs = append(fs, field{false, v, n})
		}
		r := bitReader{buf: w.buf}
		for i, f := range fs {
			var got uint64
			var err error
			if f.unary {
				got, err = r.unary(uint64(f.n))
			} else {
				got, err = r.read(f.n)
			}
			if err != nil || got != f.v {
				t.Fatalf("round %d field %d (%+v): got %d, %v", round, i, f, got, err)
			}
		}
		if r.pos+8 <= uint(len(w.buf))*8 || r.pos > uint(len(w.buf))*8 {
			t.Fatalf("round %d: read %d bits of a %d-byte buffer", round, r.pos, len(w.buf))
		}
		if _, err := r.read(uint(len(w.buf))*8 - r.pos + 1); err == nil {
			t.Fatalf("round %d: read past the end", round)
		}
	}
}
