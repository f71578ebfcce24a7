package fatigue

import (
	"fmt"
	"math"
	"sort"
)

// BinWidth is the width of a stress-range bin: 0.5 MPa, in Pa. A cycle of
// range r falls in bin floor(r / BinWidth); the bin stands for its midpoint
// when damage is computed from the histogram (common practice; the error in
// a range is at most a quarter of a megapascal).
const BinWidth = 0.5e6

// Histogram counts cycles per stress-range bin (BinWidth wide). It is a
// Recorder. The zero value is empty and ready.
type Histogram struct {
	bins []float64 // cycles per bin, index = bin number; grown on demand
}

// Bin is one non-empty bin of a Histogram: its number (range from
// Index*BinWidth to (Index+1)*BinWidth) and its cycles.
type Bin struct {
	Index  int
	Cycles float64
}

// BinOf is the bin number of a stress range (Pa).
func BinOf(rng float64) int { return int(rng / BinWidth) }

// BinMid is the stress range (Pa) a bin stands for: its midpoint.
func BinMid(index int) float64 { return (float64(index) + 0.5) * BinWidth }

// maxBin bounds the histogram (a 50 GPa range: far beyond any steel).
const maxBin = int(50e9 / BinWidth)

// Cycle adds count cycles of range rng (Pa). Ranges beyond maxBin land in
// the last bin.
func (h *Histogram) Cycle(rng, count float64) {
	i := BinOf(rng)
	if i < 0 {
		i = 0
	}
	if i > maxBin {
		i = maxBin
	}
	if i >= len(h.bins) {
		h.grow(i)
	}
	h.bins[i] += count
}

func (h *Histogram) grow(i int) {
	n := max(2*len(h.bins), i+1, 64)
	nb := make([]float64, min(n, maxBin+1))
	copy(nb, h.bins)
	h.bins = nb
}

// AddBin adds cycles to bin index (used when reading stored histograms).
func (h *Histogram) AddBin(index int, cycles float64) error {
	if index < 0 || index > maxBin {
		return fmt.Errorf("fatigue: bin %d outside 0..%d", index, maxBin)
	}
	if cycles < 0 || math.IsNaN(cycles) || math.IsInf(cycles, 0) {
		return fmt.Errorf("fatigue: bin %d: %v cycles; want a finite count >= 0", index, cycles)
	}
	if index >= len(h.bins) {
		h.grow(index)
	}
	h.bins[index] += cycles
	return nil
}

// Merge adds every bin of o.
func (h *Histogram) Merge(o *Histogram) {
	for _, b := range o.Bins() {
		_ = h.AddBin(b.Index, b.Cycles)
	}
}

// Bins lists the non-empty bins in increasing range.
func (h *Histogram) Bins() []Bin {
	var out []Bin
	for i, c := range h.bins {
		if c != 0 {
			out = append(out, Bin{i, c})
		}
	}
	return out
}

// Cycles is the total number of cycles counted.
func (h *Histogram) Cycles() float64 {
	var s float64
	for _, c := range h.bins {
		s += c
	}
	return s
}

// Reset empties the histogram, keeping its storage.
func (h *Histogram) Reset() { clear(h.bins) }

// Empty reports whether no cycle was counted.
func (h *Histogram) Empty() bool {
	for _, c := range h.bins {
		if c != 0 {
			return false
		}
	}
	return true
}

// Blocks turns the histogram into stress-range blocks at the bins' midpoints,
// in increasing range, for Miner's sum.
func (h *Histogram) Blocks() []Block {
	bins := h.Bins()
	out := make([]Block, len(bins))
	for i, b := range bins {
		out[i] = Block{Range: BinMid(b.Index), Cycles: b.Cycles}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Range < out[j].Range })
	return out
}
