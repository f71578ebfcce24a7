package store

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"time"
)

// FatigueBin is the cycles counted in one stress-range bin (range from
// Bin*width to (Bin+1)*width).
type FatigueBin struct {
	Bin    int
	Cycles float64
}

// FatigueHour is the cycles one gauge counted in one hour (Hour is the
// hour's start, logger clock), sparse: only bins with cycles.
type FatigueHour struct {
	Hour time.Time
	Bins []FatigueBin
}

// FatigueUpdate is what one commit adds for one fatigue gauge: cycles per
// hour (added to what is stored) and the counter state after the commit's
// samples (replacing the stored one).
type FatigueUpdate struct {
	Structure string
	Channel   string
	Hours     []FatigueHour
	// LastTime is the time of the last sample the counter has taken.
	LastTime time.Time
	// BinWidth is the histograms' bin width in Pa.
	BinWidth float64
	// State is the counter's serialised state.
	State []byte
}

// FatigueState is a gauge's stored counter state.
type FatigueState struct {
	Channel  string
	LastTime time.Time
	BinWidth float64
	State    []byte
}

func writeFatigue(ctx context.Context, tx *sql.Tx, stage func(CommitResult) ([]FatigueUpdate, error), res CommitResult) error {
	ups, err := stage(res)
	if err != nil {
		return fmt.Errorf("store: fatigue update: %w", err)
	}
	if len(ups) == 0 {
		return nil
	}
	addBin, err := tx.PrepareContext(ctx, `INSERT INTO fatigue_hours (structure, channel, hour, bin, cycles) VALUES (?, ?, ?, ?, ?)
		ON CONFLICT (structure, channel, hour, bin) DO UPDATE SET cycles = cycles + excluded.cycles`)
	if err != nil {
		return fmt.Errorf("store: fatigue update: %w", err)
	}
	defer addBin.Close()
	for _, u := range ups {
		if u.Structure == "" || u.Channel == "" || !(u.BinWidth > 0) {
			return fmt.Errorf("store: fatigue update of %q/%q: structure, channel and a positive bin width are required", u.Structure, u.Channel)
		}
		for _, h := range u.Hours {
			for _, b := range h.Bins {
				if b.Bin < 0 || b.Cycles < 0 || math.IsNaN(b.Cycles) || math.IsInf(b.Cycles, 0) {
					return fmt.Errorf("store: fatigue update of %s/%s at %s: bin %d with %v cycles", u.Structure, u.Channel, h.Hour.UTC().Format(time.RFC3339), b.Bin, b.Cycles)
				}
				if _, err := addBin.ExecContext(ctx, u.Structure, u.Channel, h.Hour.Unix(), b.Bin, b.Cycles); err != nil {
					return fmt.Errorf("store: fatigue histogram of %s/%s: %w", u.Structure, u.Channel, err)
				}
			}
		}
		_, err := tx.ExecContext(ctx, `INSERT INTO fatigue_state (structure, channel, last_ts, bin_width, state) VALUES (?, ?, ?, ?, ?)
			ON CONFLICT (structure, channel) DO UPDATE SET last_ts = excluded.last_ts, bin_width = excluded.bin_width, state = excluded.state`,
			u.Structure, u.Channel, clampNs(u.LastTime), u.BinWidth, u.State)
		if err != nil {
			return fmt.Errorf("store: fatigue state of %s/%s: %w", u.Structure, u.Channel, err)
		}
	}
	return nil
}

// FatigueStates returns the stored counter states of a structure's gauges.
func (s *Store) FatigueStates(ctx context.Context, structure string) ([]FatigueState, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT channel, last_ts, bin_width, state FROM fatigue_state WHERE structure = ? ORDER BY channel`, structure)
	if err != nil {
		return nil, fmt.Errorf("store: fatigue states of %q: %w", structure, err)
	}
	defer rows.Close()
	var out []FatigueState
	for rows.Next() {
		var f FatigueState
		var ns int64
		if err := rows.Scan(&f.Channel, &ns, &f.BinWidth, &f.State); err != nil {
			return nil, fmt.Errorf("store: fatigue states of %q: %w", structure, err)
		}
		f.LastTime = time.Unix(0, ns).UTC()
		out = append(out, f)
	}
	return out, rows.Err()
}

// FatigueHours returns a gauge's hourly histograms for the hours starting
// in [from, to), in time order.
func (s *Store) FatigueHours(ctx context.Context, structure, channel string, from, to time.Time) ([]FatigueHour, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT hour, bin, cycles FROM fatigue_hours
		WHERE structure = ? AND channel = ? AND hour >= ? AND hour < ? ORDER BY hour, bin`,
		structure, channel, clampNs(from)/1e9, ceilSeconds(to))
	if err != nil {
		return nil, fmt.Errorf("store: fatigue hours of %s/%s: %w", structure, channel, err)
	}
	defer rows.Close()
	var out []FatigueHour
	for rows.Next() {
		var h int64
		var b FatigueBin
		if err := rows.Scan(&h, &b.Bin, &b.Cycles); err != nil {
			return nil, fmt.Errorf("store: fatigue hours of %s/%s: %w", structure, channel, err)
		}
		if len(out) == 0 || out[len(out)-1].Hour.Unix() != h {
			out = append(out, FatigueHour{Hour: time.Unix(h, 0).UTC()})
		}
		out[len(out)-1].Bins = append(out[len(out)-1].Bins, b)
	}
	return out, rows.Err()
}

// FatigueChannels lists the gauges of a structure with stored fatigue
// histograms.
func (s *Store) FatigueChannels(ctx context.Context, structure string) ([]string, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT DISTINCT channel FROM fatigue_hours WHERE structure = ? ORDER BY channel`, structure)
	if err != nil {
		return nil, fmt.Errorf("store: fatigue channels of %q: %w", structure, err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var c string
		if err := rows.Scan(&c); err != nil {
			return nil, err
		}
		out = append(out, c)
	}
	return out, rows.Err()
}

// ceilSeconds is t in Unix seconds, rounded up.
func ceilSeconds(t time.Time) int64 {
	ns := clampNs(t)
	s := ns / 1e9
	if ns%1e9 > 0 {
		s++
	}
	return s
}
