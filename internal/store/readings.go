package store

import (
	"cmp"
	"context"
	"database/sql"
	"fmt"
	"maps"
	"math"
	"slices"
	"sort"
	"strings"
	"time"

	"trussmonitor/internal/blocks"
)

// Reading is one raw value of one channel at the logger's timestamp.
// Readings are keyed by (structure, channel, time to the nanosecond; ingest
// and import round times to the microsecond first, see
// ingest.TimeResolution): a second reading with the same key and value is a
// redelivery and is not stored again; with another value it is a conflict
// (CommitResult.Conflicts), not stored either.
type Reading struct {
	Channel string
	Time    time.Time
	Value   float64
}

// Group is the readings of one structure inside a Batch (typically the
// readings of one MQTT message).
type Group struct {
	Structure string
	Readings  []Reading
}

// Batch is what one Commit writes in one transaction.
type Batch struct {
	Groups      []Group
	DeadLetters []DeadLetter
	// OnConflict, when set, turns the conflicts of group g into a dead
	// letter stored in the same transaction (ingest: conflicting_reading).
	OnConflict func(g int, cs []Conflict) DeadLetter
	// Fatigue, when set, runs inside the transaction after the readings are
	// inserted, with the result so far (which readings are new); the
	// updates it returns are written in the same transaction. An error
	// rolls the whole batch back.
	Fatigue func(CommitResult) ([]FatigueUpdate, error)
}

// Conflict is a reading whose key (channel, time) is stored, or taken by an
// earlier reading of the same batch, with another value.
type Conflict struct {
	Index  int     // position in its group's Readings
	Stored float64 // the value kept under the key
}

// CommitResult says, per group of the batch, which readings were new.
type CommitResult struct {
	// Inserted[g] is how many readings of Groups[g] were stored.
	Inserted []int
	// New[g][i] is false when Groups[g].Readings[i] was already stored
	// (a redelivery, or the same key earlier in this batch).
	New [][]bool
	// Conflicts[g] are the readings of Groups[g] that were not new and
	// differ in value from the one kept (nil when there are none).
	Conflicts [][]Conflict
	// DeadLettersAdded is the number of dead-letter rows added (repeats
	// are counted on an existing row); DeadLettersDropped the number of
	// the oldest dropped to keep under Options.MaxDeadLetters.
	DeadLettersAdded, DeadLettersDropped int64
}

// rowsPerStatement is the number of readings per multi-VALUES INSERT; PROBES.md
// measured ~200k rows/s with 100-row statements against 85k with single rows.
const rowsPerStatement = 200

// checkReading reports why r cannot be stored, or nil.
func checkReading(structure string, r Reading) error {
	if structure == "" {
		return fmt.Errorf("empty structure name (channel %q)", r.Channel)
	}
	if r.Channel == "" {
		return fmt.Errorf("structure %q: empty channel name", structure)
	}
	if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
		return fmt.Errorf("structure %q channel %q at %s: value %v is not finite", structure, r.Channel, r.Time.Format(time.RFC3339Nano), r.Value)
	}
	if !Storable(r.Time) {
		lo, hi := StorableRange()
		return fmt.Errorf("structure %q channel %q: time %s is outside the storable range %s to %s", structure, r.Channel, r.Time.Format(time.RFC3339), lo.Format(time.DateOnly), hi.Format(time.DateOnly))
	}
	return nil
}

// InsertReadings stores rs for structure in one transaction and returns how
// many of them were new (not already stored under the same channel and time).
func (s *Store) InsertReadings(ctx context.Context, structure string, rs []Reading) (int, error) {
	res, err := s.Commit(ctx, Batch{Groups: []Group{{Structure: structure, Readings: rs}}})
	if err != nil {
		return 0, err
	}
	return res.Inserted[0], nil
}

// chunkSize is the rows of the next statement when n are left: full
// statements, then powers of two, so that a handful of prepared statement
// sizes serve every batch size.
func chunkSize(n int) int {
	if n >= rowsPerStatement {
		return rowsPerStatement
	}
	c := 1
	for c*2 <= n {
		c *= 2
	}
	return c
}

type rowKey struct {
	ch int64
	ts int64
}

type rowPos struct{ g, i int }

// Commit writes every group's readings and every dead letter of b in one
// transaction: all of it is durable when Commit returns nil, none of it when
// it returns an error. Readings already stored are not stored again
// (writeRuns).
func (s *Store) Commit(ctx context.Context, b Batch) (CommitResult, error) {
	res := CommitResult{Inserted: make([]int, len(b.Groups)), New: make([][]bool, len(b.Groups)), Conflicts: make([][]Conflict, len(b.Groups))}
	total := 0
	for g, grp := range b.Groups {
		for _, r := range grp.Readings {
			if err := checkReading(grp.Structure, r); err != nil {
				return CommitResult{}, fmt.Errorf("store: commit: %w", err)
			}
		}
		res.New[g] = make([]bool, len(grp.Readings))
		total += len(grp.Readings)
	}
	// SQLite checks the foreign keys of keyed and staged rows itself: a
	// staged row is one check for a whole run. (Switching foreign_keys off
	// for the transaction, as an earlier version did, expires every
	// prepared statement of the connection, and each commit re-prepared
	// them.)
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return CommitResult{}, fmt.Errorf("store: begin: %w", err)
	}
	defer tx.Rollback()

	// The row buffers are reused from commit to commit (they were a fifth
	// of the bytes ingest allocates).
	bufs, _ := s.rowBufs.Get().(*[2][]batchRow)
	if bufs == nil {
		bufs = new([2][]batchRow)
	}
	defer s.rowBufs.Put(bufs)
	rows, newIDs, err := s.batchRows(ctx, tx, b, slices.Grow(bufs[0][:0], total))
	if err != nil {
		return CommitResult{}, err
	}
	bufs[0] = rows
	// Key order: each channel's readings become one time-ordered run,
	// equal keys adjacent, the first of the batch first.
	bufs[1] = slices.Grow(bufs[1][:0], len(rows))[:len(rows)]
	rows = sortRowsInto(rows, bufs[1])
	if err := s.writeRuns(ctx, tx, rows, &res); err != nil {
		return CommitResult{}, err
	}
	dead := b.DeadLetters
	if b.OnConflict != nil {
		for g, cs := range res.Conflicts {
			if len(cs) > 0 {
				dead = append(dead, b.OnConflict(g, cs))
			}
		}
	}
	for _, d := range dead {
		n, err := insertDeadLetter(ctx, tx, d)
		if err != nil {
			return CommitResult{}, err
		}
		res.DeadLettersAdded += int64(n)
	}
	if res.DeadLettersAdded > 0 {
		if res.DeadLettersDropped, err = s.capDeadLetters(ctx, tx); err != nil {
			return CommitResult{}, err
		}
	}
	if b.Fatigue != nil {
		if err := writeFatigue(ctx, tx, b.Fatigue, res); err != nil {
			return CommitResult{}, err
		}
	}
	if err := tx.Commit(); err != nil {
		return CommitResult{}, fmt.Errorf("store: commit: %w", err)
	}
	if len(newIDs) > 0 {
		s.mu.Lock()
		for k, id := range newIDs {
			s.channels[k] = id
		}
		s.mu.Unlock()
	}
	return res, nil
}

// batchRow is one reading of a batch with its key and its place.
type batchRow struct {
	key rowKey
	val float64
	pos rowPos
}

// batchRows resolves the channel ids of every reading of b (creating the
// channels not yet stored, returned as newIDs for the cache once the
// transaction commits) and returns the readings as rows, in batch order.
func (s *Store) batchRows(ctx context.Context, tx *sql.Tx, b Batch, rows []batchRow) ([]batchRow, map[chanKey]int64, error) {
	missing := false
	s.mu.Lock()
	for g, grp := range b.Groups {
		var last chanKey
		lastID := int64(-1)
		for i, r := range grp.Readings {
			k := chanKey{grp.Structure, r.Channel}
			if k != last || lastID < 0 {
				id, ok := s.channels[k]
				if !ok {
					id = -1
					missing = true
				}
				last, lastID = k, id
			}
			rows = append(rows, batchRow{key: rowKey{lastID, r.Time.UnixNano()}, val: r.Value, pos: rowPos{g, i}})
		}
	}
	s.mu.Unlock()
	if !missing {
		return rows, nil, nil
	}
	newIDs := map[chanKey]int64{}
	for j := range rows {
		if rows[j].key.ch >= 0 {
			continue
		}
		p := rows[j].pos
		k := chanKey{b.Groups[p.g].Structure, b.Groups[p.g].Readings[p.i].Channel}
		id, ok := newIDs[k]
		if !ok {
			var err error
			if id, err = channelID(ctx, tx, k); err != nil {
				return nil, nil, err
			}
			newIDs[k] = id
		}
		rows[j].key.ch = id
	}
	return rows, newIDs, nil
}

// sortRows orders rows (given in batch order) by key, keeping batch order
// among equal keys. Channel ids are small integers, so the rows are first
// distributed by channel (a stable counting sort), then each channel's run
// is sorted by time unless it already is (a logger's readings of one
// channel usually arrive in time order).
func sortRows(rows []batchRow) []batchRow {
	return sortRowsInto(rows, make([]batchRow, len(rows)))
}

// sortRowsInto is sortRows with the space for the sorted rows given (as
// long as rows); it returns either of the two.
func sortRowsInto(rows, out []batchRow) []batchRow {
	if len(rows) < 2 {
		return rows
	}
	lo, hi := rows[0].key.ch, rows[0].key.ch
	for _, r := range rows {
		lo, hi = min(lo, r.key.ch), max(hi, r.key.ch)
	}
	byTime := func(a, b batchRow) int { return cmp.Compare(a.key.ts, b.key.ts) }
	if span := hi - lo + 1; span > int64(4*len(rows)+1024) {
		slices.SortStableFunc(rows, func(a, b batchRow) int {
			return cmp.Or(cmp.Compare(a.key.ch, b.key.ch), cmp.Compare(a.key.ts, b.key.ts))
		})
		return rows
	}
	start := make([]int, hi-lo+2)
	for _, r := range rows {
		start[r.key.ch-lo+1]++
	}
	for c := 1; c < len(start); c++ {
		start[c] += start[c-1]
	}
	next := slices.Clone(start[:len(start)-1])
	for _, r := range rows {
		c := r.key.ch - lo
		out[next[c]] = r
		next[c]++
	}
	for c := 0; c+1 < len(start); c++ {
		if run := out[start[c]:start[c+1]]; !slices.IsSortedFunc(run, byTime) {
			slices.SortStableFunc(run, byTime)
		}
	}
	return out
}

// writeRuns decides for every reading of the batch (rows in key order)
// whether it is new, a redelivery (its key held with the same value: in the
// batch before it, in a keyed row, a staged run or a block) or a conflict
// (held with another value), and writes the new ones: a channel's run of at
// least StageMinRun new readings as staged rows (staged.go), a shorter one
// as keyed rows.
func (s *Store) writeRuns(ctx context.Context, tx *sql.Tx, rows []batchRow, res *CommitResult) error {
	var ranges []chanRange
	for i := 0; i < len(rows); {
		j := i + 1
		for j < len(rows) && rows[j].key.ch == rows[i].key.ch {
			j++
		}
		ranges = append(ranges, chanRange{rows[i].key.ch, rows[i].key.ts, rows[j-1].key.ts})
		i = j
	}
	held, err := s.existing(ctx, tx, ranges)
	if err != nil {
		return err
	}
	blocked := s.blockedBefore(rows)
	inBlocks := blockCache{}
	var keyed []batchRow
	var fresh []int // rows of the current run that are new
	var pts []blocks.Point
	var staged []stagedRow
	touched := false
	i := 0
	for _, cr := range ranges {
		fresh = fresh[:0]
		var kept float64 // the value held under the current key
		for start := i; i < len(rows) && rows[i].key.ch == cr.ch; i++ {
			r := rows[i]
			isNew := false
			switch v, ok := held[r.key]; {
			case i > start && rows[i-1].key == r.key:
				// The same key earlier in the batch: kept is its value.
			case ok:
				kept = v
			case blocked[i]:
				v, inBlock, err := inBlocks.storedInBlock(ctx, tx, r.key.ch, r.key.ts)
				if err != nil {
					return err
				}
				kept, isNew = v, !inBlock
			default:
				isNew = true
			}
			if isNew {
				kept = r.val
				res.New[r.pos.g][r.pos.i] = true
				res.Inserted[r.pos.g]++
				fresh = append(fresh, i)
				continue
			}
			if r.val != kept {
				res.Conflicts[r.pos.g] = append(res.Conflicts[r.pos.g], Conflict{Index: r.pos.i, Stored: kept})
				touched = true
			}
		}
		if len(fresh) < StageMinRun {
			for _, j := range fresh {
				keyed = append(keyed, rows[j])
			}
			continue
		}
		pts = pts[:0]
		for _, j := range fresh {
			pts = append(pts, blocks.Point{Time: rows[j].key.ts, Value: rows[j].val})
		}
		staged = appendRuns(staged, cr.ch, pts)
	}
	if err := s.insertStaged(ctx, tx, staged); err != nil {
		return err
	}
	if err := s.insertRows(ctx, tx, keyed); err != nil {
		return err
	}
	if touched {
		// In each group's reading order, as the dead letters list them.
		for _, cs := range res.Conflicts {
			slices.SortFunc(cs, func(a, b Conflict) int { return cmp.Compare(a.Index, b.Index) })
		}
	}
	return nil
}

// channelID returns the id of a channel, creating the row when needed.
func channelID(ctx context.Context, tx *sql.Tx, k chanKey) (int64, error) {
	var id int64
	err := tx.QueryRowContext(ctx,
		`INSERT INTO channels (structure, name) VALUES (?, ?)
		 ON CONFLICT (structure, name) DO UPDATE SET name = excluded.name
		 RETURNING id`, k.structure, k.name).Scan(&id)
	if err != nil {
		return 0, fmt.Errorf("store: channel %q of structure %q: %w", k.name, k.structure, err)
	}
	return id, nil
}

// insertStatement builds an n-row INSERT into the keyed row table. The
// commit has checked every key first (writeRuns), so a constraint error
// means the file was changed under the write lock and fails the commit.
// OR FAIL: such an error fails the transaction anyway, so SQLite need not
// keep a statement journal to undo a part of the statement (a temporary
// file written for every multi-row statement that may abort).
func insertStatement(n int) string {
	var sb strings.Builder
	sb.WriteString("INSERT OR FAIL INTO readings (channel, ts, value) VALUES ")
	for i := range n {
		if i > 0 {
			sb.WriteByte(',')
		}
		sb.WriteString("(?,?,?)")
	}
	return sb.String()
}

// insertRows inserts keyed rows, rowsPerStatement at a time.
func (s *Store) insertRows(ctx context.Context, tx *sql.Tx, keys []batchRow) error {
	for len(keys) > 0 {
		n := chunkSize(len(keys))
		args := make([]any, 0, 3*n)
		for _, k := range keys[:n] {
			args = append(args, k.key.ch, k.key.ts, k.val)
		}
		st, err := s.statement(ctx, n)
		if err != nil {
			return err
		}
		if _, err := tx.StmtContext(ctx, st).ExecContext(ctx, args...); err != nil {
			return fmt.Errorf("store: inserting %d readings: %w", n, err)
		}
		keys = keys[n:]
	}
	return nil
}

type stmtKey struct {
	n int
}

// statement returns a prepared n-row insert, prepared once per size and
// kept for the life of the store (SQLite parsing was 12 % of commit time).
func (s *Store) statement(ctx context.Context, n int) (*sql.Stmt, error) {
	k := stmtKey{n}
	s.mu.Lock()
	st, ok := s.stmts[k]
	s.mu.Unlock()
	if ok {
		return st, nil
	}
	st, err := s.db.PrepareContext(ctx, insertStatement(n))
	if err != nil {
		return nil, fmt.Errorf("store: preparing a %d-row insert: %w", n, err)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if old, ok := s.stmts[k]; ok {
		st.Close()
		return old, nil
	}
	if len(s.stmts) >= maxStatements {
		// Odd sizes come from the last chunk of a batch; keep the cache small.
		for k2, old := range s.stmts {
			if k2.n != rowsPerStatement {
				old.Close()
				delete(s.stmts, k2)
			}
		}
	}
	s.stmts[k] = st
	return st, nil
}

const maxStatements = 64

// Channels returns the names of the channels stored for structure, sorted.
func (s *Store) Channels(ctx context.Context, structure string) ([]string, error) {
	m, err := s.channelMap(ctx, structure)
	if err != nil {
		return nil, err
	}
	names := make([]string, 0, len(m))
	for _, n := range m {
		names = append(names, n)
	}
	sort.Strings(names)
	return names, nil
}

// Structures returns the structure names that have channels, sorted.
func (s *Store) Structures(ctx context.Context) ([]string, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT DISTINCT structure FROM channels ORDER BY structure`)
	if err != nil {
		return nil, fmt.Errorf("store: listing structures: %w", err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			return nil, fmt.Errorf("store: listing structures: %w", err)
		}
		out = append(out, n)
	}
	return out, rows.Err()
}

// channelMap maps channel id to name for one structure.
func (s *Store) channelMap(ctx context.Context, structure string) (map[int64]string, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT id, name FROM channels WHERE structure = ?`, structure)
	if err != nil {
		return nil, fmt.Errorf("store: channels of %q: %w", structure, err)
	}
	defer rows.Close()
	m := map[int64]string{}
	for rows.Next() {
		var id int64
		var n string
		if err := rows.Scan(&id, &n); err != nil {
			return nil, fmt.Errorf("store: channels of %q: %w", structure, err)
		}
		m[id] = n
	}
	return m, rows.Err()
}

// nsRange turns [from, to) into nanosecond bounds; a zero time is unbounded.
func nsRange(from, to time.Time) (int64, int64) {
	lo, hi := int64(math.MinInt64), int64(math.MaxInt64)
	if !from.IsZero() {
		lo = clampNs(from)
	}
	if !to.IsZero() {
		hi = clampNs(to)
	}
	return lo, hi
}

func clampNs(t time.Time) int64 {
	switch {
	case t.Before(time.Unix(0, earliestStorableNs)):
		return math.MinInt64
	case t.After(time.Unix(0, latestStorableNs)):
		return math.MaxInt64
	}
	return t.UnixNano()
}

// CountReadings returns how many readings of structure lie in [from, to);
// a zero from or to leaves that side unbounded.
func (s *Store) CountReadings(ctx context.Context, structure string, from, to time.Time) (int64, error) {
	lo, hi := nsRange(from, to)
	var n int64
	err := s.db.QueryRowContext(ctx,
		`SELECT count(*) FROM readings WHERE channel IN (SELECT id FROM channels WHERE structure = ?) AND ts >= ? AND ts < ?`,
		structure, lo, hi).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("store: counting readings of %q: %w", structure, err)
	}
	nb, err := s.countBlockReadings(ctx, structure, lo, hi)
	if err != nil {
		return 0, err
	}
	ns, err := s.countStaged(ctx, structure, lo, hi)
	return n + nb + ns, err
}

// ReadReadings calls fn for every reading of structure in [from, to) (a
// zero from or to leaves that side unbounded), ordered by time and then by
// channel name, so that a replay sees the same order every time. It stops at
// the first error fn returns and returns it. Memory stays bounded: the range
// is read in time chunks that adapt to the density of the data.
func (s *Store) ReadReadings(ctx context.Context, structure string, from, to time.Time, fn func(Reading) error) error {
	return s.readReadings(ctx, structure, nil, from, to, fn)
}

// ReadChannelReadings is ReadReadings for the given channels of structure
// only (names the store does not know are left out): the other channels'
// readings are not read at all, so that, for example, recounting two
// fatigue gauges does not read the whole structure again.
func (s *Store) ReadChannelReadings(ctx context.Context, structure string, channels []string, from, to time.Time, fn func(Reading) error) error {
	if channels == nil {
		channels = []string{}
	}
	return s.readReadings(ctx, structure, channels, from, to, fn)
}

// readReadings reads the readings of structure in [from, to), of every
// channel (only nil) or of the channels named in only.
func (s *Store) readReadings(ctx context.Context, structure string, only []string, from, to time.Time, fn func(Reading) error) error {
	names, err := s.channelMap(ctx, structure)
	if err != nil {
		return err
	}
	query := `SELECT channel, ts, value FROM readings WHERE channel IN (SELECT id FROM channels WHERE structure = ?) AND ts >= ? AND ts < ?`
	var chanArgs []any
	if only != nil {
		keep := make(map[string]bool, len(only))
		for _, c := range only {
			keep[c] = true
		}
		for id, n := range names {
			if !keep[n] {
				delete(names, id)
			}
		}
		ids := slices.Sorted(maps.Keys(names))
		for _, id := range ids {
			chanArgs = append(chanArgs, id)
		}
		query = `SELECT channel, ts, value FROM readings WHERE channel IN (` + strings.Repeat("?,", len(ids)-min(len(ids), 1)) + `?) AND ts >= ? AND ts < ?`
	}
	if len(names) == 0 {
		return nil
	}
	ids := make([]int64, 0, len(names))
	for id := range names {
		ids = append(ids, id)
	}
	// Rank channels by name so the order does not depend on row ids.
	sort.Slice(ids, func(a, b int) bool { return names[ids[a]] < names[ids[b]] })
	rank := make(map[int64]int, len(ids))
	for i, id := range ids {
		rank[id] = i
	}
	lo, hi := nsRange(from, to)
	chunk := s.opts.ReadChunk.Nanoseconds()
	const lowRows, highRows = 20_000, 100_000

	type row struct {
		ch   int64
		ts   int64
		val  float64
		rank int // the channel's rank by name
	}
	var buf []row
	blk := &blockReader{s: s, ids: ids, cache: map[[2]int64][]blocks.Point{}}
	stg := &stagedReader{s: s, ids: ids, cache: map[[2]int64][]blocks.Point{}}
	cur := lo
	seek := true // find the next stored time before the first chunk and after an empty one
	for cur < hi {
		if seek {
			next, ok, err := s.nextTime(ctx, ids, cur, hi)
			if err != nil {
				return fmt.Errorf("store: reading %q: %w", structure, err)
			}
			if !ok {
				return nil
			}
			cur = next
		}
		end := hi
		if hi-cur > chunk {
			end = cur + chunk
		}
		buf = buf[:0]
		args := append(chanArgs[:len(chanArgs):len(chanArgs)], cur, end)
		if only == nil {
			args = []any{structure, cur, end}
		}
		rows, err := s.db.QueryContext(ctx, query, args...)
		if err != nil {
			return fmt.Errorf("store: reading %q: %w", structure, err)
		}
		for rows.Next() {
			var r row
			if err := rows.Scan(&r.ch, &r.ts, &r.val); err != nil {
				rows.Close()
				return fmt.Errorf("store: reading %q: %w", structure, err)
			}
			r.rank = rank[r.ch]
			buf = append(buf, r)
		}
		if err := rows.Err(); err != nil {
			rows.Close()
			return fmt.Errorf("store: reading %q: %w", structure, err)
		}
		rows.Close()
		if err := blk.points(ctx, cur, end, func(ch int64, p blocks.Point) {
			buf = append(buf, row{ch: ch, ts: p.Time, val: p.Value, rank: rank[ch]})
		}); err != nil {
			return fmt.Errorf("store: reading %q: %w", structure, err)
		}
		if err := stg.points(ctx, cur, end, func(ch int64, p blocks.Point) {
			buf = append(buf, row{ch: ch, ts: p.Time, val: p.Value, rank: rank[ch]})
		}); err != nil {
			return fmt.Errorf("store: reading %q: %w", structure, err)
		}
		// Time, then channel order (a reading's channel and time are
		// unique, so any sort gives this one order).
		slices.SortFunc(buf, func(a, b row) int {
			if a.ts != b.ts {
				return cmp.Compare(a.ts, b.ts)
			}
			return cmp.Compare(a.rank, b.rank)
		})
		for _, r := range buf {
			if err := fn(Reading{Channel: names[r.ch], Time: time.Unix(0, r.ts).UTC(), Value: r.val}); err != nil {
				return err
			}
		}
		seek = len(buf) == 0
		switch {
		case len(buf) > highRows && chunk > 1:
			chunk /= 2
		case len(buf) < lowRows && chunk < math.MaxInt64/4:
			chunk *= 2
		}
		cur = end
	}
	return nil
}

// nextTime returns the smallest stored timestamp in [from, to) over ids.
func (s *Store) nextTime(ctx context.Context, ids []int64, from, to int64) (int64, bool, error) {
	best, found := int64(0), false
	for _, id := range ids {
		var ts int64
		err := s.db.QueryRowContext(ctx,
			`SELECT ts FROM readings WHERE channel = ? AND ts >= ? AND ts < ? ORDER BY ts LIMIT 1`, id, from, to).Scan(&ts)
		if err == sql.ErrNoRows {
			continue
		}
		if err != nil {
			return 0, false, err
		}
		if !found || ts < best {
			best, found = ts, true
		}
	}
	if bt, ok, err := s.firstBlockTime(ctx, ids, from, to); err != nil {
		return 0, false, err
	} else if ok && (!found || bt < best) {
		best, found = bt, true
	}
	if st, ok, err := s.firstStagedTime(ctx, ids, from, to); err != nil {
		return 0, false, err
	} else if ok && (!found || st < best) {
		best, found = st, true
	}
	return best, found, nil
}

// LastReadings returns the time of the latest stored reading of every
// channel of structure at or before notAfter (a zero notAfter: no bound), in
// one query (each channel's maximum is one step down the (channel, ts)
// primary key). The bound leaves out readings from the future that an
// earlier version stored. Channels without readings are left out.
//
// Readings in blocks count too (a block whose last reading lies beyond
// notAfter is passed over: ingest refuses readings that far ahead).
func (s *Store) LastReadings(ctx context.Context, structure string, notAfter time.Time) (map[string]time.Time, error) {
	_, hi := nsRange(time.Time{}, notAfter)
	rows, err := s.db.QueryContext(ctx,
		`SELECT c.name, max(
			coalesce((SELECT max(r.ts) FROM readings r WHERE r.channel = c.id AND r.ts <= ?), -9223372036854775808),
			coalesce((SELECT max(b.last) FROM reading_blocks b WHERE b.channel = c.id AND b.last <= ?), -9223372036854775808),
			coalesce((SELECT max(s.last) FROM staged_readings s WHERE s.channel = c.id AND s.last <= ?), -9223372036854775808))
		 FROM channels c WHERE c.structure = ?`, hi, hi, hi, structure)
	if err != nil {
		return nil, fmt.Errorf("store: last readings of %q: %w", structure, err)
	}
	defer rows.Close()
	last := map[string]int64{}
	for rows.Next() {
		var name string
		var ts sql.NullInt64
		if err := rows.Scan(&name, &ts); err != nil {
			return nil, fmt.Errorf("store: last readings of %q: %w", structure, err)
		}
		if ts.Valid && ts.Int64 != math.MinInt64 {
			last[name] = ts.Int64
		}
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("store: last readings of %q: %w", structure, err)
	}
	rows.Close()
	if err := s.lastStagedStraddling(ctx, structure, hi, last); err != nil {
		return nil, err
	}
	out := make(map[string]time.Time, len(last))
	for name, ts := range last {
		out[name] = time.Unix(0, ts).UTC()
	}
	return out, nil
}
