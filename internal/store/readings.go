package store

import (
	"cmp"
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"
	"maps"
	"math"
	"slices"
	"sort"
	"strconv"
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

// Time range limits of the INTEGER nanosecond column.
var (
	minTime = time.Unix(0, math.MinInt64).Add(time.Second)
	maxTime = time.Unix(0, math.MaxInt64).Add(-time.Second)
)

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
	if r.Time.Before(minTime) || r.Time.After(maxTime) {
		return fmt.Errorf("structure %q channel %q: time %s is outside the storable range (years 1678 to 2262)", structure, r.Channel, r.Time.Format(time.RFC3339))
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
// it returns an error. Readings already stored are ignored (INSERT OR IGNORE).
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
	// The readings' foreign key (channel -> channels.id) would be checked
	// by SQLite once per row, a fifth of the insert's time; the ids come
	// from the channels table, so this transaction checks each distinct
	// channel once instead (checkChannels), on a connection whose
	// per-row check is off for the transaction and on again before the
	// connection returns to the pool. No other table written here has a
	// foreign key.
	conn, err := s.db.Conn(ctx)
	if err != nil {
		return CommitResult{}, fmt.Errorf("store: begin: %w", err)
	}
	defer restoreForeignKeys(conn)
	if _, err := conn.ExecContext(ctx, "PRAGMA foreign_keys = OFF"); err != nil {
		return CommitResult{}, fmt.Errorf("store: begin: %w", err)
	}
	tx, err := conn.BeginTx(ctx, nil)
	if err != nil {
		return CommitResult{}, fmt.Errorf("store: begin: %w", err)
	}
	defer tx.Rollback()

	rows, newIDs, err := s.batchRows(ctx, tx, b, total)
	if err != nil {
		return CommitResult{}, err
	}
	if err := checkChannels(ctx, tx, rows); err != nil {
		return CommitResult{}, err
	}
	// Insert in key order: consecutive rows then land on the same B-tree
	// leaf pages instead of jumping between channels. Equal keys are
	// adjacent, the first of the batch first.
	rows = sortRows(rows)
	// The rows to insert: the first of each key, unless a block (a period
	// already compacted) holds the key, which makes it a redelivery.
	blocked := s.blockedBefore(rows)
	inBlocks := blockCache{}
	heldInBlock := map[rowKey]float64{} // keys a block already holds, with its value
	ins := make([]batchRow, 0, len(rows))
	for j, r := range rows {
		if j > 0 && rows[j-1].key == r.key {
			continue
		}
		if blocked[j] {
			if v, held, err := inBlocks.storedInBlock(ctx, tx, r.key.ch, r.key.ts); err != nil {
				return CommitResult{}, err
			} else if held {
				heldInBlock[r.key] = v
				continue
			}
		}
		ins = append(ins, r)
	}
	for start := 0; start < len(ins); {
		end := start + chunkSize(len(ins)-start)
		if err := s.insertChunk(ctx, tx, ins[start:end], &res); err != nil {
			return CommitResult{}, err
		}
		start = end
	}
	if err := s.findConflicts(ctx, tx, b, rows, heldInBlock, &res); err != nil {
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
func (s *Store) batchRows(ctx context.Context, tx *sql.Tx, b Batch, total int) ([]batchRow, map[chanKey]int64, error) {
	rows := make([]batchRow, 0, total)
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

// restoreForeignKeys turns the foreign-key checks of conn back on and
// returns it to the pool; a connection where that fails is discarded, never
// reused without the checks.
func restoreForeignKeys(conn *sql.Conn) {
	if _, err := conn.ExecContext(context.Background(), "PRAGMA foreign_keys = ON"); err != nil {
		conn.Raw(func(any) error { return driver.ErrBadConn })
	}
	conn.Close()
}

// checkChannels is the readings' foreign key, checked once per distinct
// channel of the batch: every channel id must be a row of channels.
func checkChannels(ctx context.Context, tx *sql.Tx, rows []batchRow) error {
	ids := map[int64]bool{}
	var list []byte
	list = append(list, '[')
	for _, r := range rows {
		if !ids[r.key.ch] {
			if len(ids) > 0 {
				list = append(list, ',')
			}
			ids[r.key.ch] = true
			list = strconv.AppendInt(list, r.key.ch, 10)
		}
	}
	if len(ids) == 0 {
		return nil
	}
	list = append(list, ']')
	var n int
	if err := tx.QueryRowContext(ctx, `SELECT count(*) FROM channels WHERE id IN (SELECT value FROM json_each(?))`, string(list)).Scan(&n); err != nil {
		return fmt.Errorf("store: checking the batch's channels: %w", err)
	}
	if n != len(ids) {
		return fmt.Errorf("store: commit: %d of the batch's %d channel ids are not in the channels table (FOREIGN KEY constraint of readings.channel)", len(ids)-n, len(ids))
	}
	return nil
}

// sortRows orders rows (given in batch order) by key, keeping batch order
// among equal keys. Channel ids are small integers, so the rows are first
// distributed by channel (a stable counting sort), then each channel's run
// is sorted by time unless it already is (a logger's readings of one
// channel usually arrive in time order).
func sortRows(rows []batchRow) []batchRow {
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
	out := make([]batchRow, len(rows))
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

// findConflicts compares every reading that was not new with the value
// kept under its key: the first of the batch when that one was new, else
// the value stored before (in a block, or read back from the row table;
// redeliveries are rare). rows are the batch's readings in key order, the
// first of each key first.
func (s *Store) findConflicts(ctx context.Context, tx *sql.Tx, b Batch, rows []batchRow, heldInBlock map[rowKey]float64, res *CommitResult) error {
	var lookup *sql.Stmt
	defer func() {
		if lookup != nil {
			lookup.Close()
		}
	}()
	stored := heldInBlock // values kept in blocks; rows are read back below
	head := 0             // the first row of the current key
	touched := false
	for j, r := range rows {
		if j == 0 || rows[j-1].key != r.key {
			head = j
		}
		if res.New[r.pos.g][r.pos.i] {
			continue
		}
		var kept float64
		if h := rows[head]; j != head && res.New[h.pos.g][h.pos.i] {
			kept = h.val
		} else if v, ok := stored[r.key]; ok {
			kept = v
		} else {
			if lookup == nil {
				var err error
				if lookup, err = tx.PrepareContext(ctx, `SELECT value FROM readings WHERE channel = ? AND ts = ?`); err != nil {
					return fmt.Errorf("store: reading back a stored reading: %w", err)
				}
			}
			if err := lookup.QueryRowContext(ctx, r.key.ch, r.key.ts).Scan(&kept); err != nil {
				rd := b.Groups[r.pos.g].Readings[r.pos.i]
				return fmt.Errorf("store: reading back channel %q at %s: %w", rd.Channel, rd.Time.Format(time.RFC3339Nano), err)
			}
			stored[r.key] = kept
		}
		if r.val != kept {
			res.Conflicts[r.pos.g] = append(res.Conflicts[r.pos.g], Conflict{Index: r.pos.i, Stored: kept})
			touched = true
		}
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

// insertStatement builds an n-row INSERT OR IGNORE that returns the keys it
// actually inserted (ignored rows return nothing).
func insertStatement(n int, returning bool) string {
	var sb strings.Builder
	sb.WriteString("INSERT OR IGNORE INTO readings (channel, ts, value) VALUES ")
	for i := range n {
		if i > 0 {
			sb.WriteByte(',')
		}
		sb.WriteString("(?,?,?)")
	}
	if returning {
		sb.WriteString(" RETURNING channel, ts")
	}
	return sb.String()
}

// insertChunk inserts one multi-VALUES statement's rows. The fast path is a
// plain INSERT OR IGNORE: when SQLite reports every row inserted, all are
// new. When some were ignored (a redelivery), the statement is rolled back to
// a savepoint and repeated with RETURNING to learn which rows were new;
// redeliveries are rare, so the common case pays nothing for that.
func (s *Store) insertChunk(ctx context.Context, tx *sql.Tx, keys []batchRow, res *CommitResult) error {
	args := make([]any, 0, 3*len(keys))
	for _, k := range keys {
		args = append(args, k.key.ch, k.key.ts, k.val)
	}
	if _, err := tx.ExecContext(ctx, "SAVEPOINT chunk"); err != nil {
		return fmt.Errorf("store: inserting %d readings: %w", len(keys), err)
	}
	st, err := s.statement(ctx, len(keys), false)
	if err != nil {
		return err
	}
	r, err := tx.StmtContext(ctx, st).ExecContext(ctx, args...)
	if err != nil {
		return fmt.Errorf("store: inserting %d readings: %w", len(keys), err)
	}
	n, err := r.RowsAffected()
	if err != nil {
		return fmt.Errorf("store: inserting %d readings: %w", len(keys), err)
	}
	if int(n) == len(keys) {
		for _, k := range keys {
			p := k.pos
			res.New[p.g][p.i] = true
			res.Inserted[p.g]++
		}
		_, err := tx.ExecContext(ctx, "RELEASE chunk")
		return err
	}
	if _, err := tx.ExecContext(ctx, "ROLLBACK TO chunk"); err != nil {
		return fmt.Errorf("store: inserting %d readings: %w", len(keys), err)
	}
	st, err = s.statement(ctx, len(keys), true)
	if err != nil {
		return err
	}
	rows, err := tx.StmtContext(ctx, st).QueryContext(ctx, args...)
	if err != nil {
		return fmt.Errorf("store: inserting %d readings: %w", len(keys), err)
	}
	defer rows.Close()
	first := make(map[rowKey]rowPos, len(keys))
	for _, k := range keys {
		first[k.key] = k.pos
	}
	for rows.Next() {
		var k rowKey
		if err := rows.Scan(&k.ch, &k.ts); err != nil {
			return fmt.Errorf("store: inserting readings: %w", err)
		}
		p, ok := first[k]
		if !ok {
			return fmt.Errorf("store: inserting readings: SQLite returned a key (%d, %d) that was not inserted", k.ch, k.ts)
		}
		res.New[p.g][p.i] = true
		res.Inserted[p.g]++
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("store: inserting %d readings: %w", len(keys), err)
	}
	rows.Close()
	_, err = tx.ExecContext(ctx, "RELEASE chunk")
	return err
}

type stmtKey struct {
	n         int
	returning bool
}

// statement returns a prepared n-row insert, prepared once per size and
// kept for the life of the store (SQLite parsing was 12 % of commit time).
func (s *Store) statement(ctx context.Context, n int, returning bool) (*sql.Stmt, error) {
	k := stmtKey{n, returning}
	s.mu.Lock()
	st, ok := s.stmts[k]
	s.mu.Unlock()
	if ok {
		return st, nil
	}
	st, err := s.db.PrepareContext(ctx, insertStatement(n, returning))
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
	case t.Before(minTime):
		return math.MinInt64
	case t.After(maxTime):
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
	return n + nb, err
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
			coalesce((SELECT max(b.last) FROM reading_blocks b WHERE b.channel = c.id AND b.last <= ?), -9223372036854775808))
		 FROM channels c WHERE c.structure = ?`, hi, hi, structure)
	if err != nil {
		return nil, fmt.Errorf("store: last readings of %q: %w", structure, err)
	}
	defer rows.Close()
	out := map[string]time.Time{}
	for rows.Next() {
		var name string
		var ts sql.NullInt64
		if err := rows.Scan(&name, &ts); err != nil {
			return nil, fmt.Errorf("store: last readings of %q: %w", structure, err)
		}
		if ts.Valid && ts.Int64 != math.MinInt64 {
			out[name] = time.Unix(0, ts.Int64).UTC()
		}
	}
	return out, rows.Err()
}
