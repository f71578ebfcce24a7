package store

import (
	"context"
	"database/sql"
	"fmt"
	"sort"
	"time"

	"trussmonitor/internal/blocks"
)

// Readings live in two places. Recent ones are rows of the keyed table
// `readings` (channel, ts) as ingest commits them; Compact moves the
// readings of closed hours (entirely older than the compaction horizon)
// into the compressed row of `reading_blocks` of the channel's block period
// holding them (internal/blocks: about 1-4 bytes a reading instead of
// 26.5; a period fits the channel's rate, blockspan.go). Every read
// (ReadReadings, CountReadings, LastReadings, retention) sees the union, and
// every promise of the row store holds for blocks too:
//
//   - a reading committed for a period that already has a block is compared
//     with the block inside the commit's transaction: the same value is a
//     redelivery (not new), another value a conflict; a new time joins the
//     rows and merges into the block at the next compaction (a late
//     reading);
//   - Compact rewrites one block and deletes its rows in one transaction,
//     so a kill at any point leaves every reading either in its rows or in
//     its block, never in neither (and never twice: the commit check above
//     runs under the same write lock);
//   - retention deletes whole blocks older than the cut and rewrites the
//     block that straddles it; VACUUM INTO copies both tables.

// BlockSpan is the step of compaction (Compact moves closed hours) and the
// shortest block period: an hour of one channel (3600 readings at 1 Hz,
// 720,000 at 200 Hz). Slower channels get longer periods (blockspan.go).
const BlockSpan = time.Hour

const spanNs = int64(BlockSpan)

// CompactAfter is how old readings are before the service compacts them:
// an hour is closed once it ended one more BlockSpan ago, so the
// dashboard's recent series and a logger's normal lateness stay in rows,
// and compaction rewrites a block for the hours of its open period and for
// a backlog that arrives later.
const CompactAfter = 2 * BlockSpan

// CompactStats counts what one Compact did.
type CompactStats struct {
	Blocks   int   // blocks written (new or merged)
	Readings int64 // readings moved from rows into blocks
}

// Compact moves the readings of every closed hour (ending at or before
// `before`, rounded down to BlockSpan) from rows into the block of the
// channel's period holding it, one block per transaction; a channel's
// first Compact chooses its block period (choosePlan). Readings that
// arrive later for such an hour are kept as rows and merged into the block
// by the next Compact.
func (s *Store) Compact(ctx context.Context, before time.Time) (CompactStats, error) {
	var st CompactStats
	horizon := floorTo(clampNs(before), spanNs)
	rows, err := s.db.QueryContext(ctx, `SELECT id FROM channels ORDER BY id`)
	if err != nil {
		return st, fmt.Errorf("store: compact: %w", err)
	}
	var ids []int64
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id); err != nil {
			rows.Close()
			return st, fmt.Errorf("store: compact: %w", err)
		}
		ids = append(ids, id)
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return st, fmt.Errorf("store: compact: %w", err)
	}
	for _, id := range ids {
		from := int64(-1 << 63)
		var plan *blockPlan
		for {
			if err := ctx.Err(); err != nil {
				return st, err
			}
			var ts sql.NullInt64
			if err := s.db.QueryRowContext(ctx,
				`SELECT min(ts) FROM readings WHERE channel = ? AND ts >= ? AND ts < ?`, id, from, horizon).Scan(&ts); err != nil {
				return st, fmt.Errorf("store: compact channel id %d: %w", id, err)
			}
			first, staged, err := firstStagedLast(ctx, s.db, id, from, horizon)
			if err != nil {
				return st, err
			}
			if ts.Valid && (!staged || ts.Int64 < first) {
				first, staged = ts.Int64, true
			}
			if !staged {
				break
			}
			if plan == nil {
				p, err := s.choosePlan(ctx, id)
				if err != nil {
					return st, err
				}
				plan = &p
			}
			start, end := plan.period(first)
			end = min(end, horizon)
			n, err := s.compactBlock(ctx, id, start, end)
			if err != nil {
				return st, err
			}
			st.Blocks++
			st.Readings += n
			from = end
		}
	}
	return st, nil
}

// compactBlock merges the rows of channel ch in [start, end) (the block
// period starting at start, or its closed part) into the period's block in
// one transaction and returns how many rows it moved.
func (s *Store) compactBlock(ctx context.Context, ch, start, end int64) (int64, error) {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return 0, fmt.Errorf("store: compact: %w", err)
	}
	defer tx.Rollback()
	pts, err := blockPoints(ctx, tx, ch, start)
	if err != nil {
		return 0, err
	}
	rows, err := tx.QueryContext(ctx, `SELECT ts, value FROM readings WHERE channel = ? AND ts >= ? AND ts < ? ORDER BY ts`, ch, start, end)
	if err != nil {
		return 0, fmt.Errorf("store: compact channel id %d: %w", ch, err)
	}
	var fresh []blocks.Point
	for rows.Next() {
		var p blocks.Point
		if err := rows.Scan(&p.Time, &p.Value); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: compact channel id %d: %w", ch, err)
		}
		fresh = append(fresh, p)
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return 0, fmt.Errorf("store: compact channel id %d: %w", ch, err)
	}
	// Staged runs (staged.go) of the period join the rows; their times are
	// distinct from the rows' and the block's (the commit checks).
	staged, err := stagedPeriod(ctx, tx, ch, start, end)
	if err != nil {
		return 0, err
	}
	if len(staged) > 0 {
		fresh = mergePoints(fresh, staged)
	}
	merged := mergePoints(pts, fresh)
	if err := putBlock(ctx, tx, ch, start, merged); err != nil {
		return 0, err
	}
	if _, err := tx.ExecContext(ctx, `DELETE FROM readings WHERE channel = ? AND ts >= ? AND ts < ?`, ch, start, end); err != nil {
		return 0, fmt.Errorf("store: compact channel id %d: %w", ch, err)
	}
	if len(staged) > 0 {
		if err := deleteStagedPeriod(ctx, tx, ch, start, end); err != nil {
			return 0, err
		}
	}
	if len(merged) > 0 {
		s.noteBlock(ch, merged[len(merged)-1].Time)
	}
	if err := tx.Commit(); err != nil {
		return 0, fmt.Errorf("store: compact channel id %d: %w", ch, err)
	}
	return int64(len(fresh)), nil
}

// mergePoints merges two time-ordered point lists; on an equal time the
// first list's value is kept (the commit check keeps a time from being in
// both, so this only guards the invariant).
func mergePoints(a, b []blocks.Point) []blocks.Point {
	out := make([]blocks.Point, 0, len(a)+len(b))
	i, j := 0, 0
	for i < len(a) || j < len(b) {
		switch {
		case j == len(b) || i < len(a) && a[i].Time < b[j].Time:
			out = append(out, a[i])
			i++
		case i == len(a) || b[j].Time < a[i].Time:
			out = append(out, b[j])
			j++
		default:
			out = append(out, a[i])
			i++
			j++
		}
	}
	return out
}

// querier is what both *sql.DB and *sql.Tx offer for reading.
type querier interface {
	QueryRowContext(ctx context.Context, query string, args ...any) *sql.Row
	QueryContext(ctx context.Context, query string, args ...any) (*sql.Rows, error)
}

// blockPoints returns the points of one block (nil when there is none).
func blockPoints(ctx context.Context, q querier, ch, start int64) ([]blocks.Point, error) {
	var data []byte
	err := q.QueryRowContext(ctx, `SELECT data FROM reading_blocks WHERE channel = ? AND start = ?`, ch, start).Scan(&data)
	if err == sql.ErrNoRows {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("store: block of channel id %d at %s: %w", ch, time.Unix(0, start).UTC().Format(time.RFC3339), err)
	}
	pts, err := blocks.Decode(data)
	if err != nil {
		return nil, fmt.Errorf("store: block of channel id %d at %s: %w", ch, time.Unix(0, start).UTC().Format(time.RFC3339), err)
	}
	return pts, nil
}

// putBlock writes (or replaces) a block, or deletes it when pts is empty.
func putBlock(ctx context.Context, tx *sql.Tx, ch, start int64, pts []blocks.Point) error {
	if len(pts) == 0 {
		_, err := tx.ExecContext(ctx, `DELETE FROM reading_blocks WHERE channel = ? AND start = ?`, ch, start)
		return err
	}
	data, err := blocks.Encode(pts)
	if err != nil {
		return fmt.Errorf("store: block of channel id %d: %w", ch, err)
	}
	_, err = tx.ExecContext(ctx,
		`INSERT INTO reading_blocks (channel, start, first, last, n, data) VALUES (?, ?, ?, ?, ?, ?)
		 ON CONFLICT (channel, start) DO UPDATE SET first = excluded.first, last = excluded.last, n = excluded.n, data = excluded.data`,
		ch, start, pts[0].Time, pts[len(pts)-1].Time, len(pts), data)
	if err != nil {
		return fmt.Errorf("store: writing block of channel id %d: %w", ch, err)
	}
	return nil
}

// noteBlock records that channel ch has a block reading at last, so that
// commits check readings at or before it against the blocks.
func (s *Store) noteBlock(ch, last int64) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if end := addNs(last, 1); end > s.blockedUntil[ch] {
		s.blockedUntil[ch] = end
	}
}

// loadBlockHorizons reads, per channel, its latest block reading.
func (s *Store) loadBlockHorizons(ctx context.Context) error {
	rows, err := s.db.QueryContext(ctx, `SELECT channel, max(last) FROM reading_blocks GROUP BY channel`)
	if err != nil {
		return fmt.Errorf("store: block horizons: %w", err)
	}
	defer rows.Close()
	for rows.Next() {
		var ch, last int64
		if err := rows.Scan(&ch, &last); err != nil {
			return fmt.Errorf("store: block horizons: %w", err)
		}
		s.blockedUntil[ch] = addNs(last, 1)
	}
	return rows.Err()
}

// blockedBefore reports, per row, whether its reading may be held by a
// block: whether it is not later than the channel's latest block reading
// (a time after it is in no block, whatever the block periods). Called inside a write transaction, after the
// lock is taken, so a concurrent Compact has either finished (and noted its
// block) or not started.
func (s *Store) blockedBefore(rows []batchRow) []bool {
	blocked := make([]bool, len(rows))
	s.mu.Lock()
	defer s.mu.Unlock()
	for j, r := range rows {
		blocked[j] = r.key.ts < s.blockedUntil[r.key.ch]
	}
	return blocked
}

// blockCache holds decoded blocks during one commit.
type blockCache map[[2]int64]map[int64]float64

// storedInBlock returns the value a block keeps for channel ch at ts.
func (c blockCache) storedInBlock(ctx context.Context, s *Store, tx *sql.Tx, ch, ts int64) (float64, bool, error) {
	start, _ := s.plan(ch).period(ts)
	key := [2]int64{ch, start}
	vals, ok := c[key]
	if !ok {
		pts, err := blockPoints(ctx, tx, ch, key[1])
		if err != nil {
			return 0, false, err
		}
		vals = make(map[int64]float64, len(pts))
		for _, p := range pts {
			vals[p.Time] = p.Value
		}
		c[key] = vals
	}
	v, ok := vals[ts]
	return v, ok, nil
}

// blockReader yields the block points of a set of channels over a time
// range in chunks, decoding each block once while the range passes it.
type blockReader struct {
	s     *Store
	ids   []int64
	cache map[[2]int64][]blocks.Point
}

// points appends the block points in [lo, hi) of every channel to fn.
func (br *blockReader) points(ctx context.Context, lo, hi int64, fn func(ch int64, p blocks.Point)) error {
	for key, pts := range br.cache {
		if len(pts) == 0 || pts[len(pts)-1].Time < lo {
			delete(br.cache, key)
		}
	}
	for _, ch := range br.ids {
		rows, err := br.s.db.QueryContext(ctx,
			`SELECT start FROM reading_blocks WHERE channel = ? AND start > ? AND start < ? AND last >= ? AND first < ?`,
			ch, br.s.plan(ch).earliestStart(lo), hi, lo, hi)
		if err != nil {
			return fmt.Errorf("store: blocks of channel id %d: %w", ch, err)
		}
		var starts []int64
		for rows.Next() {
			var st int64
			if err := rows.Scan(&st); err != nil {
				rows.Close()
				return fmt.Errorf("store: blocks of channel id %d: %w", ch, err)
			}
			starts = append(starts, st)
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return fmt.Errorf("store: blocks of channel id %d: %w", ch, err)
		}
		for _, st := range starts {
			key := [2]int64{ch, st}
			pts, ok := br.cache[key]
			if !ok {
				if pts, err = blockPoints(ctx, br.s.db, ch, st); err != nil {
					return err
				}
				br.cache[key] = pts
			}
			i := sort.Search(len(pts), func(i int) bool { return pts[i].Time >= lo })
			for ; i < len(pts) && pts[i].Time < hi; i++ {
				fn(ch, pts[i])
			}
		}
	}
	return nil
}

// firstBlockTime returns the earliest block reading time in [from, to)
// over ids.
func (s *Store) firstBlockTime(ctx context.Context, ids []int64, from, to int64) (int64, bool, error) {
	best, found := int64(0), false
	for _, ch := range ids {
		var start, first int64
		err := s.db.QueryRowContext(ctx,
			`SELECT start, first FROM reading_blocks WHERE channel = ? AND start > ? AND start < ? AND last >= ? ORDER BY start LIMIT 1`,
			ch, s.plan(ch).earliestStart(from), to, from).Scan(&start, &first)
		if err == sql.ErrNoRows {
			continue
		}
		if err != nil {
			return 0, false, err
		}
		t := first
		if first < from {
			pts, err := blockPoints(ctx, s.db, ch, start)
			if err != nil {
				return 0, false, err
			}
			i := sort.Search(len(pts), func(i int) bool { return pts[i].Time >= from })
			if i == len(pts) {
				continue
			}
			t = pts[i].Time
		}
		if t >= to {
			continue
		}
		if !found || t < best {
			best, found = t, true
		}
	}
	return best, found, nil
}

// countBlockReadings counts the block readings of structure in [lo, hi).
func (s *Store) countBlockReadings(ctx context.Context, structure string, lo, hi int64) (int64, error) {
	var whole int64
	if err := s.db.QueryRowContext(ctx,
		`SELECT coalesce(sum(n), 0) FROM reading_blocks WHERE channel IN (SELECT id FROM channels WHERE structure = ?) AND first >= ? AND last < ?`,
		structure, lo, hi).Scan(&whole); err != nil {
		return 0, fmt.Errorf("store: counting block readings of %q: %w", structure, err)
	}
	rows, err := s.db.QueryContext(ctx,
		`SELECT channel, start FROM reading_blocks WHERE channel IN (SELECT id FROM channels WHERE structure = ?)
		 AND last >= ? AND first < ? AND NOT (first >= ? AND last < ?)`, structure, lo, hi, lo, hi)
	if err != nil {
		return 0, fmt.Errorf("store: counting block readings of %q: %w", structure, err)
	}
	var partial [][2]int64
	for rows.Next() {
		var k [2]int64
		if err := rows.Scan(&k[0], &k[1]); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: counting block readings of %q: %w", structure, err)
		}
		partial = append(partial, k)
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return 0, fmt.Errorf("store: counting block readings of %q: %w", structure, err)
	}
	for _, k := range partial {
		pts, err := blockPoints(ctx, s.db, k[0], k[1])
		if err != nil {
			return 0, err
		}
		for _, p := range pts {
			if p.Time >= lo && p.Time < hi {
				whole++
			}
		}
	}
	return whole, nil
}

// pruneBlocks deletes the block readings of channel ch before ts: whole
// blocks whose last reading is older, and the older part of the block that
// straddles ts.
func (s *Store) pruneBlocks(ctx context.Context, ch, ts int64) (int64, error) {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return 0, fmt.Errorf("store: prune blocks: %w", err)
	}
	defer tx.Rollback()
	var n int64
	if err := tx.QueryRowContext(ctx, `SELECT coalesce(sum(n), 0) FROM reading_blocks WHERE channel = ? AND last < ?`, ch, ts).Scan(&n); err != nil {
		return 0, fmt.Errorf("store: prune blocks of channel id %d: %w", ch, err)
	}
	if _, err := tx.ExecContext(ctx, `DELETE FROM reading_blocks WHERE channel = ? AND last < ?`, ch, ts); err != nil {
		return 0, fmt.Errorf("store: prune blocks of channel id %d: %w", ch, err)
	}
	var start int64
	err = tx.QueryRowContext(ctx, `SELECT start FROM reading_blocks WHERE channel = ? AND first < ? AND last >= ?`, ch, ts, ts).Scan(&start)
	switch {
	case err == sql.ErrNoRows:
	case err != nil:
		return 0, fmt.Errorf("store: prune blocks of channel id %d: %w", ch, err)
	default:
		pts, err := blockPoints(ctx, tx, ch, start)
		if err != nil {
			return 0, err
		}
		i := sort.Search(len(pts), func(i int) bool { return pts[i].Time >= ts })
		if err := putBlock(ctx, tx, ch, start, pts[i:]); err != nil {
			return 0, err
		}
		n += int64(i)
	}
	if err := tx.Commit(); err != nil {
		return 0, fmt.Errorf("store: prune blocks of channel id %d: %w", ch, err)
	}
	return n, nil
}
