package store

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"slices"
	"time"

	"trussmonitor/internal/blocks"
)

// Block periods fit the channel's rate. A block's SQLite row costs about
// 65 bytes beside its payload, so a block should hold enough readings to
// make that small per reading: one hour holds 3,600 readings at 1 Hz but
// only 60 at one a minute (about 1.1 bytes a reading for the row alone).
// Each channel therefore gets its own block period, chosen once, at its
// first compaction, from its observed sample interval (the median
// interval of its latest readings, sampleInterval; chooseSpan): the
// longest of blockSpans that holds at most BlockTarget readings at that
// interval (1 h at 1 Hz, 2 days at one a minute, 7 days at one every
// 5 minutes or slower). The choice is stored in channels.block_span and
// never changes, so a channel's periods never overlap.
//
// Compaction still steps by the hour (BlockSpan): every closed hour past
// the lateness horizon (CompactAfter) is merged into the channel's block
// for the period holding it, rewriting that block while the period is
// open. A long period thus delays no reading's compaction, and the rewrite
// is bounded: a block holds about BlockTarget readings at most (at the
// rate it was chosen for) and is rewritten at most once per hour of its
// period (48 times for a two-day block).
//
// Files written before schema version 8 hold one-hour blocks; migration 8
// sets channels.block_from of each channel that has blocks to the end of
// its last block's hour. Periods before block_from are hours, periods from
// block_from on follow the channel's chosen span (the first one cut at
// block_from).

// BlockTarget is the most readings a block period is chosen to hold at the
// channel's observed sample interval.
const BlockTarget = 4096

// blockSpans are the block periods a channel may get, shortest first; each
// is a whole number of hours (so a multiple of StageSpan and BlockSpan).
var blockSpans = []time.Duration{
	time.Hour, 2 * time.Hour, 3 * time.Hour, 4 * time.Hour, 6 * time.Hour, 8 * time.Hour, 12 * time.Hour,
	24 * time.Hour, 48 * time.Hour, 96 * time.Hour, 168 * time.Hour,
}

// chooseSpan returns the longest of blockSpans that holds at most
// BlockTarget readings one interval apart (the shortest when none does).
// A non-positive interval (fewer than two readings seen) gives the
// shortest.
func chooseSpan(interval time.Duration) time.Duration {
	best := blockSpans[0]
	if interval <= 0 {
		return best
	}
	for _, sp := range blockSpans {
		if sp/interval <= BlockTarget {
			best = sp
		}
	}
	return best
}

// blockPlan is how one channel's time is cut into block periods: whole
// hours before from, span-aligned periods from `from` on (the first one
// starting at from when from is not span-aligned).
type blockPlan struct {
	span int64 // ns; spanNs when not chosen yet
	from int64 // ns; math.MinInt64 for a channel without older blocks
}

// floorTo returns the largest multiple of step at or below ts.
func floorTo(ts, step int64) int64 {
	s := ts - ts%step
	if ts%step < 0 {
		s -= step
	}
	return s
}

// addNs returns a+b for b >= 0, saturating at math.MaxInt64.
func addNs(a, b int64) int64 {
	if a > math.MaxInt64-b {
		return math.MaxInt64
	}
	return a + b
}

// period returns the block period [start, end) holding ts.
func (p blockPlan) period(ts int64) (start, end int64) {
	if ts < p.from {
		start = floorTo(ts, spanNs)
		return start, min(addNs(start, spanNs), p.from)
	}
	start = max(floorTo(ts, p.span), p.from)
	return start, addNs(floorTo(ts, p.span), p.span)
}

// earliestStart is the smallest block start that can hold a reading at or
// after ts (no period is longer than the plan's span).
func (p blockPlan) earliestStart(ts int64) int64 {
	sp := max(p.span, spanNs)
	if ts < math.MinInt64+sp {
		return math.MinInt64
	}
	return ts - sp
}

// plan returns the block plan of channel ch as last loaded or chosen.
func (s *Store) plan(ch int64) blockPlan {
	s.mu.Lock()
	defer s.mu.Unlock()
	if p, ok := s.plans[ch]; ok {
		return p
	}
	return blockPlan{span: spanNs, from: math.MinInt64}
}

// loadPlans reads every channel's block plan.
func (s *Store) loadPlans(ctx context.Context) error {
	rows, err := s.db.QueryContext(ctx, `SELECT id, block_span, block_from FROM channels WHERE block_span IS NOT NULL OR block_from IS NOT NULL`)
	if err != nil {
		return fmt.Errorf("store: block periods: %w", err)
	}
	defer rows.Close()
	for rows.Next() {
		var ch int64
		var span, from sql.NullInt64
		if err := rows.Scan(&ch, &span, &from); err != nil {
			return fmt.Errorf("store: block periods: %w", err)
		}
		s.plans[ch] = planOf(span, from)
	}
	return rows.Err()
}

// planOf is the plan of the stored columns block_span and block_from.
func planOf(span, from sql.NullInt64) blockPlan {
	p := blockPlan{span: spanNs, from: math.MinInt64}
	if span.Valid {
		p.span = span.Int64
	}
	if from.Valid {
		p.from = from.Int64
	}
	return p
}

// choosePlan returns the block plan of channel ch, choosing its span first
// when it has none (the store's Options.BlockSpan, else chooseSpan of the
// channel's sample interval). The choice is written before any block of the new span, so a
// kill leaves either no choice or one that the next Compact reads back.
func (s *Store) choosePlan(ctx context.Context, ch int64) (blockPlan, error) {
	var span, from sql.NullInt64
	if err := s.db.QueryRowContext(ctx, `SELECT block_span, block_from FROM channels WHERE id = ?`, ch).Scan(&span, &from); err != nil {
		return blockPlan{}, fmt.Errorf("store: block period of channel id %d: %w", ch, err)
	}
	if !span.Valid {
		sp := s.opts.BlockSpan
		if sp == 0 {
			iv, err := s.sampleInterval(ctx, ch)
			if err != nil {
				return blockPlan{}, err
			}
			sp = chooseSpan(iv)
		}
		if _, err := s.db.ExecContext(ctx, `UPDATE channels SET block_span = ? WHERE id = ? AND block_span IS NULL`, int64(sp), ch); err != nil {
			return blockPlan{}, fmt.Errorf("store: setting the block period of channel id %d: %w", ch, err)
		}
		if err := s.db.QueryRowContext(ctx, `SELECT block_span, block_from FROM channels WHERE id = ?`, ch).Scan(&span, &from); err != nil {
			return blockPlan{}, fmt.Errorf("store: block period of channel id %d: %w", ch, err)
		}
	}
	p := planOf(span, from)
	s.mu.Lock()
	s.plans[ch] = p
	s.mu.Unlock()
	return p, nil
}

// intervalSample is how many of a channel's latest readings
// sampleInterval looks at.
const intervalSample = 65

// sampleInterval returns the median interval between the channel's latest
// readings in rows and staged runs (up to intervalSample of them; the
// median, so that a few late readings or a gap do not count), or 0 when
// there are fewer than two.
func (s *Store) sampleInterval(ctx context.Context, ch int64) (time.Duration, error) {
	var ts []int64
	rows, err := s.db.QueryContext(ctx, `SELECT ts FROM readings WHERE channel = ? ORDER BY ts DESC LIMIT ?`, ch, intervalSample)
	if err != nil {
		return 0, fmt.Errorf("store: sample interval of channel id %d: %w", ch, err)
	}
	for rows.Next() {
		var t int64
		if err := rows.Scan(&t); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: sample interval of channel id %d: %w", ch, err)
		}
		ts = append(ts, t)
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return 0, fmt.Errorf("store: sample interval of channel id %d: %w", ch, err)
	}
	rows, err = s.db.QueryContext(ctx, `SELECT data FROM staged_readings INDEXED BY staged_by_last WHERE channel = ? ORDER BY last DESC LIMIT ?`, ch, intervalSample)
	if err != nil {
		return 0, fmt.Errorf("store: sample interval of channel id %d: %w", ch, err)
	}
	var pts []blocks.Point
	for rows.Next() {
		var data []byte
		if err := rows.Scan(&data); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: sample interval of channel id %d: %w", ch, err)
		}
		if pts, err = decodeRun(pts[:0], data); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: staged run of channel id %d: %w", ch, err)
		}
		for _, p := range pts {
			ts = append(ts, p.Time)
		}
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return 0, fmt.Errorf("store: sample interval of channel id %d: %w", ch, err)
	}
	return medianInterval(ts, intervalSample), nil
}

// medianInterval returns the median difference between the latest n
// distinct times of ts (in any order; ts is sorted in place), or 0 when
// there are fewer than two.
func medianInterval(ts []int64, n int) time.Duration {
	slices.Sort(ts)
	ts = slices.Compact(ts)
	if len(ts) > n {
		ts = ts[len(ts)-n:]
	}
	if len(ts) < 2 {
		return 0
	}
	d := make([]int64, len(ts)-1)
	for i := range d {
		d[i] = ts[i+1] - ts[i]
	}
	slices.Sort(d)
	return time.Duration(d[len(d)/2])
}
