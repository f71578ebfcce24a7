package store

import (
	"cmp"
	"context"
	"database/sql"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"time"

	"trussmonitor/internal/blocks"
)

// Staged runs: the ingest path's answer to one B-tree row per reading.
//
// A commit holds, per channel, a run of readings sorted by time (a pack of
// 50 channels at one time, 200 packs to a commit, is 50 runs of 200). The
// new readings of a run that has at least StageMinRun of them are written
// as one row of `staged_readings` per StageSpan period the run touches: the run's first and last time, its count, and its times and
// values encoded by encodeRun. Shorter runs (a channel sampled once a
// second gives runs of one) keep going to the keyed row table `readings`,
// where one row is cheaper than a staged row with its two index entries.
//
// Every promise of the keyed table holds for staged runs:
//
//   - duplicates and conflicts are decided exactly, inside the commit's
//     write transaction: one statement (existingStmt) looks up, for every
//     channel of the batch at once, the keyed rows and the staged runs that
//     overlap the time range of the batch's run, and the blocks are checked
//     as before (blockedBefore); a reading whose (channel, time) is held
//     with the same value is a redelivery, with another value a conflict.
//     So a staged row never shares a time with another staged row, a keyed
//     row or a block of its channel, and (channel, last) is unique;
//   - a staged row lies inside one block period, so Compact moves it into
//     its block whole, in the transaction that rewrites the block;
//   - every read (ReadReadings, CountReadings, LastReadings), retention and
//     Compact see keyed rows, staged runs and blocks; VACUUM INTO copies
//     all three tables.

// StageSpan bounds the time a staged row covers: a run is cut at every
// multiple of StageSpan (which divides every block period and the
// compaction step BlockSpan, so a staged row also lies inside one block
// period and one compaction step). Every lookup of the rows that overlap a time
// range [lo, hi] is then the bounded index range lo <= last < hi+StageSpan.
const StageSpan = time.Minute

const stageNs = int64(StageSpan)

// stageEnd is the end of the StageSpan period holding ts.
func stageEnd(ts int64) int64 {
	s := ts - ts%stageNs
	if ts%stageNs < 0 {
		s -= stageNs
	}
	if s > math.MaxInt64-stageNs {
		return math.MaxInt64
	}
	return s + stageNs
}

// pastStage is hi + StageSpan without overflowing.
func pastStage(hi int64) int64 {
	if hi > math.MaxInt64-stageNs {
		return math.MaxInt64
	}
	return hi + stageNs
}

// StageMinRun is the fewest new readings of one channel in one commit that
// are written as a staged run rather than as keyed rows. A staged row costs
// about three B-tree inserts (the row and its two index entries) and a blob
// against one insert per keyed row.
const StageMinRun = 16

// encodeRun encodes time-ordered points with distinct times: the count
// (uvarint), the first time (8 bytes, little endian), each later time as
// the uvarint difference to the one before, then every value's IEEE 754
// bits (8 bytes each, little endian). Cheap to write on the commit path;
// Compact re-encodes the readings into blocks.
func encodeRun(pts []blocks.Point) []byte {
	b := make([]byte, 0, binary.MaxVarintLen64+8+3*len(pts)+8*len(pts))
	b = binary.AppendUvarint(b, uint64(len(pts)))
	if len(pts) == 0 {
		return b
	}
	b = binary.LittleEndian.AppendUint64(b, uint64(pts[0].Time))
	for i := 1; i < len(pts); i++ {
		b = binary.AppendUvarint(b, uint64(pts[i].Time-pts[i-1].Time))
	}
	for _, p := range pts {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(p.Value))
	}
	return b
}

// errRunCorrupt is the cause of every decodeRun error.
var errRunCorrupt = errors.New("staged run is corrupt")

// decodeRun appends the points encoded by encodeRun to dst.
func decodeRun(dst []blocks.Point, b []byte) ([]blocks.Point, error) {
	n, k := binary.Uvarint(b)
	if k <= 0 {
		return dst, fmt.Errorf("%w: bad count", errRunCorrupt)
	}
	b = b[k:]
	if n == 0 {
		return dst, nil
	}
	if n > uint64(len(b)/9) { // at least 1 byte of time and 8 of value each
		return dst, fmt.Errorf("%w: count %d does not fit %d bytes", errRunCorrupt, n, len(b))
	}
	if len(b) < 8 {
		return dst, fmt.Errorf("%w: no first time", errRunCorrupt)
	}
	base := len(dst)
	dst = slices.Grow(dst, int(n))
	t := int64(binary.LittleEndian.Uint64(b))
	b = b[8:]
	dst = append(dst, blocks.Point{Time: t})
	for i := uint64(1); i < n; i++ {
		d, k := binary.Uvarint(b)
		next := int64(uint64(t) + d) // wraps below t on overflow
		if k <= 0 || next <= t {
			return dst[:base], fmt.Errorf("%w: bad time difference at reading %d", errRunCorrupt, i)
		}
		b = b[k:]
		t = next
		dst = append(dst, blocks.Point{Time: t})
	}
	if uint64(len(b)) != 8*n {
		return dst[:base], fmt.Errorf("%w: %d bytes of values for %d readings", errRunCorrupt, len(b), n)
	}
	for i := range int(n) {
		dst[base+i].Value = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return dst, nil
}

// chanRange is the time range [lo, hi] of one channel's run in a batch.
type chanRange struct{ ch, lo, hi int64 }

// existingStmt is the statement that returns, for n (channel, lo, hi)
// triples, the keyed rows in [lo, hi] (ts, value) and the staged runs
// overlapping it (data): two bounded index seeks per channel in one
// statement. (The triples as one JSON argument cost four times as much:
// SQLite's JSON extraction per row.)
func existingStmt(n int) string {
	q := make([]byte, 0, 512+8*n)
	q = append(q, "WITH q(ch, lo, hi) AS (VALUES "...)
	for i := range n {
		if i > 0 {
			q = append(q, ',')
		}
		q = append(q, "(?,?,?)"...)
	}
	q = append(q, `)
SELECT r.channel, r.ts, r.value, NULL FROM q CROSS JOIN readings r ON r.channel = q.ch AND r.ts >= q.lo AND r.ts <= q.hi
UNION ALL
SELECT s.channel, NULL, NULL, s.data FROM q CROSS JOIN staged_readings s INDEXED BY staged_by_last
	ON s.channel = q.ch AND s.last >= q.lo AND s.last < q.hi + `...)
	q = append(q, stageSpanSQL...)
	q = append(q, " AND s.first <= q.hi"...)
	return string(q)
}

// stageSpanSQL is StageSpan in nanoseconds as SQL text.
var stageSpanSQL = strconv.FormatInt(stageNs, 10)

// rangesPerStatement is the most channels one existingStmt looks up.
const rangesPerStatement = 64

// existing returns the values held in keyed rows and staged runs under the
// keys of the batch's runs that are taken (nil when none is: the common
// case, a logger's readings moving forward in time).
func (s *Store) existing(ctx context.Context, tx *sql.Tx, ranges []chanRange) (map[rowKey]float64, error) {
	var held map[rowKey]float64
	type run struct {
		ch   int64
		data []byte
	}
	var runs []run
	args := make([]any, 0, 3*min(len(ranges), rangesPerStatement))
	for len(ranges) > 0 {
		n := rangesPerStatement
		if len(ranges) < n {
			n = 1
			for n*2 <= len(ranges) {
				n *= 2
			}
		}
		args = args[:0]
		for _, r := range ranges[:n] {
			args = append(args, r.ch, r.lo, r.hi)
		}
		ranges = ranges[n:]
		st, err := s.prepared(ctx, existingStmt(n))
		if err != nil {
			return nil, err
		}
		rows, err := tx.StmtContext(ctx, st).QueryContext(ctx, args...)
		if err != nil {
			return nil, fmt.Errorf("store: looking up the batch's keys: %w", err)
		}
		for rows.Next() {
			var ch int64
			var ts sql.NullInt64
			var val sql.NullFloat64
			var data []byte
			if err := rows.Scan(&ch, &ts, &val, &data); err != nil {
				rows.Close()
				return nil, fmt.Errorf("store: looking up the batch's keys: %w", err)
			}
			if held == nil {
				held = map[rowKey]float64{}
			}
			if ts.Valid {
				held[rowKey{ch, ts.Int64}] = val.Float64
			} else {
				runs = append(runs, run{ch, data})
			}
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return nil, fmt.Errorf("store: looking up the batch's keys: %w", err)
		}
	}
	var pts []blocks.Point
	for _, r := range runs {
		var err error
		if pts, err = decodeRun(pts[:0], r.data); err != nil {
			return nil, fmt.Errorf("store: staged run of channel id %d: %w", r.ch, err)
		}
		for _, p := range pts {
			held[rowKey{r.ch, p.Time}] = p.Value
		}
	}
	return held, nil
}

// prepared returns a statement prepared once for the life of the store.
func (s *Store) prepared(ctx context.Context, query string) (*sql.Stmt, error) {
	s.mu.Lock()
	st, ok := s.named[query]
	s.mu.Unlock()
	if ok {
		return st, nil
	}
	st, err := s.db.PrepareContext(ctx, query)
	if err != nil {
		return nil, fmt.Errorf("store: preparing %q: %w", query, err)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if old, ok := s.named[query]; ok {
		st.Close()
		return old, nil
	}
	s.named[query] = st
	return st, nil
}

// stagedRow is one row of staged_readings to insert.
type stagedRow struct {
	ch, first, last int64
	n               int
	data            []byte
}

// appendRuns appends the rows that stage the new points of channel ch
// (time-ordered): one per StageSpan period they touch.
func appendRuns(dst []stagedRow, ch int64, pts []blocks.Point) []stagedRow {
	for len(pts) > 0 {
		end := stageEnd(pts[0].Time)
		k := len(pts)
		if pts[k-1].Time >= end {
			k = sort.Search(len(pts), func(i int) bool { return pts[i].Time >= end })
		}
		part := pts[:k]
		dst = append(dst, stagedRow{ch: ch, first: part[0].Time, last: part[k-1].Time, n: k, data: encodeRun(part)})
		pts = pts[k:]
	}
	return dst
}

// stagedPerStatement is the most staged rows one INSERT writes.
const stagedPerStatement = 64

// insertStaged writes staged rows, up to stagedPerStatement per statement
// (statements of a handful of sizes, prepared once; see chunkSize), after
// checking that every channel id is a row of channels (the foreign key).
func (s *Store) insertStaged(ctx context.Context, tx *sql.Tx, rows []stagedRow) error {
	if err := s.checkChannels(ctx, tx, rows); err != nil {
		return err
	}
	for len(rows) > 0 {
		n := stagedPerStatement
		if len(rows) < n {
			n = 1
			for n*2 <= len(rows) {
				n *= 2
			}
		}
		q := make([]byte, 0, 80+12*n)
		// OR FAIL: see insertStatement.
		q = append(q, "INSERT OR FAIL INTO staged_readings (channel, first, last, n, data) VALUES "...)
		args := make([]any, 0, 5*n)
		for i, r := range rows[:n] {
			if i > 0 {
				q = append(q, ',')
			}
			q = append(q, "(?,?,?,?,?)"...)
			args = append(args, r.ch, r.first, r.last, r.n, r.data)
		}
		st, err := s.prepared(ctx, string(q))
		if err != nil {
			return err
		}
		if _, err := tx.StmtContext(ctx, st).ExecContext(ctx, args...); err != nil {
			return fmt.Errorf("store: staging %d runs from channel id %d at %s: %w", n, rows[0].ch, time.Unix(0, rows[0].first).UTC().Format(time.RFC3339Nano), err)
		}
		rows = rows[n:]
	}
	return nil
}

// checkChannels is the foreign key of staged rows, checked once per
// distinct channel: every channel id must be a row of channels.
func (s *Store) checkChannels(ctx context.Context, tx *sql.Tx, rows []stagedRow) error {
	ids := map[int64]bool{}
	list := []byte{'['}
	for j, r := range rows {
		if j > 0 && rows[j-1].ch == r.ch || ids[r.ch] {
			continue
		}
		if len(ids) > 0 {
			list = append(list, ',')
		}
		ids[r.ch] = true
		list = strconv.AppendInt(list, r.ch, 10)
	}
	if len(ids) == 0 {
		return nil
	}
	list = append(list, ']')
	st, err := s.prepared(ctx, `SELECT count(*) FROM channels WHERE id IN (SELECT value FROM json_each(?))`)
	if err != nil {
		return err
	}
	var n int
	if err := tx.StmtContext(ctx, st).QueryRowContext(ctx, string(list)).Scan(&n); err != nil {
		return fmt.Errorf("store: checking the staged runs' channels: %w", err)
	}
	if n != len(ids) {
		return fmt.Errorf("store: commit: %d of the %d channel ids of the staged runs are not in the channels table (foreign key of staged_readings.channel)", len(ids)-n, len(ids))
	}
	return nil
}

// stagedPeriod returns the staged readings of channel ch in [start, end)
// (both multiples of StageSpan, so a staged row lies wholly inside or
// outside), time-ordered.
func stagedPeriod(ctx context.Context, q querier, ch, start, end int64) ([]blocks.Point, error) {
	rows, err := q.QueryContext(ctx, `SELECT data FROM staged_readings WHERE channel = ? AND last >= ? AND last < ?`, ch, start, end)
	if err != nil {
		return nil, fmt.Errorf("store: staged runs of channel id %d: %w", ch, err)
	}
	defer rows.Close()
	var pts []blocks.Point
	for rows.Next() {
		var data []byte
		if err := rows.Scan(&data); err != nil {
			return nil, fmt.Errorf("store: staged runs of channel id %d: %w", ch, err)
		}
		if pts, err = decodeRun(pts, data); err != nil {
			return nil, fmt.Errorf("store: staged run of channel id %d: %w", ch, err)
		}
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: staged runs of channel id %d: %w", ch, err)
	}
	slices.SortFunc(pts, func(a, b blocks.Point) int { return cmp.Compare(a.Time, b.Time) })
	return pts, nil
}

// deleteStagedPeriod deletes the staged rows of channel ch in [start, end)
// (multiples of StageSpan, as for stagedPeriod).
func deleteStagedPeriod(ctx context.Context, tx *sql.Tx, ch, start, end int64) error {
	if _, err := tx.ExecContext(ctx, `DELETE FROM staged_readings WHERE channel = ? AND last >= ? AND last < ?`, ch, start, end); err != nil {
		return fmt.Errorf("store: compact staged runs of channel id %d: %w", ch, err)
	}
	return nil
}

// firstStagedLast returns the earliest last reading of the staged rows of
// channel ch whose last reading lies in [from, horizon).
func firstStagedLast(ctx context.Context, q querier, ch, from, horizon int64) (int64, bool, error) {
	var last sql.NullInt64
	if err := q.QueryRowContext(ctx,
		`SELECT min(last) FROM staged_readings WHERE channel = ? AND last >= ? AND last < ?`, ch, from, horizon).Scan(&last); err != nil {
		return 0, false, fmt.Errorf("store: compact channel id %d: %w", ch, err)
	}
	if !last.Valid {
		return 0, false, nil
	}
	return last.Int64, true, nil
}

// stagedReader yields the staged points of a set of channels over a time
// range in chunks, decoding each staged row once while the range passes it.
type stagedReader struct {
	s     *Store
	ids   []int64
	cache map[[2]int64][]blocks.Point // by channel and last
}

// points calls fn with the staged points in [lo, hi) of every channel.
func (sr *stagedReader) points(ctx context.Context, lo, hi int64, fn func(ch int64, p blocks.Point)) error {
	for key := range sr.cache {
		if key[1] < lo {
			delete(sr.cache, key)
		}
	}
	for _, ch := range sr.ids {
		rows, err := sr.s.db.QueryContext(ctx,
			`SELECT last, data FROM staged_readings INDEXED BY staged_by_last WHERE channel = ? AND last >= ? AND last < ? AND first < ?`, ch, lo, pastStage(hi), hi)
		if err != nil {
			return fmt.Errorf("store: staged runs of channel id %d: %w", ch, err)
		}
		for rows.Next() {
			var last int64
			var data []byte
			if err := rows.Scan(&last, &data); err != nil {
				rows.Close()
				return fmt.Errorf("store: staged runs of channel id %d: %w", ch, err)
			}
			key := [2]int64{ch, last}
			pts, ok := sr.cache[key]
			if !ok {
				if pts, err = decodeRun(nil, data); err != nil {
					rows.Close()
					return fmt.Errorf("store: staged run of channel id %d: %w", ch, err)
				}
				sr.cache[key] = pts
			}
			i := sort.Search(len(pts), func(i int) bool { return pts[i].Time >= lo })
			for ; i < len(pts) && pts[i].Time < hi; i++ {
				fn(ch, pts[i])
			}
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return fmt.Errorf("store: staged runs of channel id %d: %w", ch, err)
		}
	}
	return nil
}

// firstStagedTime returns the earliest staged reading time in [from, to)
// over ids.
func (s *Store) firstStagedTime(ctx context.Context, ids []int64, from, to int64) (int64, bool, error) {
	best, found := int64(0), false
	for _, ch := range ids {
		// The earliest row starting at or after from, and the rows that
		// straddle from (staged rows of a channel hold disjoint times, but
		// their ranges may interleave after late readings).
		var first int64
		err := s.db.QueryRowContext(ctx,
			`SELECT first FROM staged_readings WHERE channel = ? AND first >= ? AND first < ? ORDER BY first LIMIT 1`, ch, from, to).Scan(&first)
		switch {
		case err == sql.ErrNoRows:
		case err != nil:
			return 0, false, err
		default:
			if !found || first < best {
				best, found = first, true
			}
		}
		rows, err := s.db.QueryContext(ctx,
			`SELECT data FROM staged_readings INDEXED BY staged_by_last WHERE channel = ? AND last >= ? AND last < ? AND first < ?`, ch, from, pastStage(from), from)
		if err != nil {
			return 0, false, err
		}
		var pts []blocks.Point
		for rows.Next() {
			var data []byte
			if err := rows.Scan(&data); err != nil {
				rows.Close()
				return 0, false, err
			}
			if pts, err = decodeRun(pts[:0], data); err != nil {
				rows.Close()
				return 0, false, fmt.Errorf("staged run of channel id %d: %w", ch, err)
			}
			i := sort.Search(len(pts), func(i int) bool { return pts[i].Time >= from })
			if i < len(pts) && pts[i].Time < to && (!found || pts[i].Time < best) {
				best, found = pts[i].Time, true
			}
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return 0, false, err
		}
	}
	return best, found, nil
}

// countStaged counts the staged readings of structure in [lo, hi).
func (s *Store) countStaged(ctx context.Context, structure string, lo, hi int64) (int64, error) {
	var whole int64
	if err := s.db.QueryRowContext(ctx,
		`SELECT coalesce(sum(n), 0) FROM staged_readings WHERE channel IN (SELECT id FROM channels WHERE structure = ?) AND first >= ? AND last < ?`,
		structure, lo, hi).Scan(&whole); err != nil {
		return 0, fmt.Errorf("store: counting staged readings of %q: %w", structure, err)
	}
	// The rows holding readings on both sides of lo, or inside the range
	// and after hi (the first condition takes a row straddling both).
	rows, err := s.db.QueryContext(ctx,
		`SELECT data FROM staged_readings INDEXED BY staged_by_last WHERE channel IN (SELECT id FROM channels WHERE structure = ?1)
		 AND last >= ?2 AND last < ?3 AND first < ?2
		 UNION ALL
		 SELECT data FROM staged_readings INDEXED BY staged_by_last WHERE channel IN (SELECT id FROM channels WHERE structure = ?1)
		 AND last >= ?4 AND last < ?5 AND first >= ?2 AND first < ?4`, structure, lo, pastStage(lo), hi, pastStage(hi))
	if err != nil {
		return 0, fmt.Errorf("store: counting staged readings of %q: %w", structure, err)
	}
	defer rows.Close()
	var pts []blocks.Point
	for rows.Next() {
		var data []byte
		if err := rows.Scan(&data); err != nil {
			return 0, fmt.Errorf("store: counting staged readings of %q: %w", structure, err)
		}
		if pts, err = decodeRun(pts[:0], data); err != nil {
			return 0, fmt.Errorf("store: counting staged readings of %q: %w", structure, err)
		}
		for _, p := range pts {
			if p.Time >= lo && p.Time < hi {
				whole++
			}
		}
	}
	return whole, rows.Err()
}

// lastStagedStraddling raises last[name] to the latest staged reading at
// or before hi held in a staged row that also holds readings after hi (the
// maximum of `last` over rows ending at or before hi is taken in SQL).
func (s *Store) lastStagedStraddling(ctx context.Context, structure string, hi int64, last map[string]int64) error {
	rows, err := s.db.QueryContext(ctx,
		`SELECT c.name, s.data FROM channels c CROSS JOIN staged_readings s INDEXED BY staged_by_last ON s.channel = c.id
		 WHERE c.structure = ? AND s.last > ? AND s.last < ? AND s.first <= ?`, structure, hi, pastStage(hi), hi)
	if err != nil {
		return fmt.Errorf("store: last readings of %q: %w", structure, err)
	}
	defer rows.Close()
	var pts []blocks.Point
	for rows.Next() {
		var name string
		var data []byte
		if err := rows.Scan(&name, &data); err != nil {
			return fmt.Errorf("store: last readings of %q: %w", structure, err)
		}
		if pts, err = decodeRun(pts[:0], data); err != nil {
			return fmt.Errorf("store: last readings of %q channel %q: %w", structure, name, err)
		}
		i := sort.Search(len(pts), func(i int) bool { return pts[i].Time > hi })
		if i > 0 {
			if cur, ok := last[name]; !ok || pts[i-1].Time > cur {
				last[name] = pts[i-1].Time
			}
		}
	}
	return rows.Err()
}

// pruneStaged deletes the staged readings of channel ch before ts: whole
// rows whose last reading is older, and the older part of the rows that
// straddle ts, in one transaction.
func (s *Store) pruneStaged(ctx context.Context, ch, ts int64) (int64, error) {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return 0, fmt.Errorf("store: prune staged runs: %w", err)
	}
	defer tx.Rollback()
	var n int64
	if err := tx.QueryRowContext(ctx, `SELECT coalesce(sum(n), 0) FROM staged_readings WHERE channel = ? AND last < ?`, ch, ts).Scan(&n); err != nil {
		return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
	}
	if _, err := tx.ExecContext(ctx, `DELETE FROM staged_readings WHERE channel = ? AND last < ?`, ch, ts); err != nil {
		return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
	}
	rows, err := tx.QueryContext(ctx, `SELECT id, data FROM staged_readings INDEXED BY staged_by_last WHERE channel = ? AND last >= ? AND last < ? AND first < ?`, ch, ts, pastStage(ts), ts)
	if err != nil {
		return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
	}
	type cut struct {
		id  int64
		pts []blocks.Point
	}
	var cuts []cut
	for rows.Next() {
		var c cut
		var data []byte
		if err := rows.Scan(&c.id, &data); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
		}
		if c.pts, err = decodeRun(nil, data); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: prune staged run of channel id %d: %w", ch, err)
		}
		cuts = append(cuts, c)
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
	}
	for _, c := range cuts {
		i := sort.Search(len(c.pts), func(i int) bool { return c.pts[i].Time >= ts })
		keep := c.pts[i:] // not empty: last >= ts
		if _, err := tx.ExecContext(ctx, `UPDATE staged_readings SET first = ?, n = ?, data = ? WHERE id = ?`,
			keep[0].Time, len(keep), encodeRun(keep), c.id); err != nil {
			return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
		}
		n += int64(i)
	}
	if err := tx.Commit(); err != nil {
		return 0, fmt.Errorf("store: prune staged runs of channel id %d: %w", ch, err)
	}
	return n, nil
}
