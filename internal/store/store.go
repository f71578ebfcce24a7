// Package store keeps the monitor's durable state in one SQLite file: raw
// readings (stored once per channel and timestamp), rejected payloads, the
// model versions in force, alarm events and per-epoch results. It owns the
// schema, its versioned migrations and the retention rules.
//
// The file runs in WAL mode with synchronous=NORMAL: a committed transaction
// survives a crash of the process; a power loss may lose the last
// transactions but never corrupts the file. Ingest acknowledges a message to
// the broker only after Commit returns, so a message lost that way is
// redelivered by the broker.
package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"net/url"
	"strings"
	"sync"
	"time"

	_ "modernc.org/sqlite" // registers the "sqlite" driver (pure Go, no cgo)
)

// Options tune how a store file is opened. The zero value is usable.
type Options struct {
	// BusyTimeout is how long a statement waits for another connection's
	// lock before failing with SQLITE_BUSY. Zero means 5 s.
	BusyTimeout time.Duration
	// ReadChunk is the first time span ReadReadings asks SQLite for at a
	// time; it adapts to the row density. Zero means 1 minute.
	ReadChunk time.Duration
	// MaxDeadLetters caps the dead-letter rows; the oldest are dropped
	// first. Zero means DefaultMaxDeadLetters.
	MaxDeadLetters int
	// BlockSpan, when not zero, is the block period given to every channel
	// that has none yet, instead of one chosen from its sample interval
	// (blockspan.go); it must be a whole number of hours (BlockSpan).
	BlockSpan time.Duration
}

// Store is an open store file. Its methods are safe for concurrent use.
type Store struct {
	db   *sql.DB
	path string
	opts Options

	mu       sync.Mutex            // guards channels and stmts
	channels map[chanKey]int64     // committed channel ids
	stmts    map[stmtKey]*sql.Stmt // prepared inserts by row count
	named    map[string]*sql.Stmt  // other statements prepared once, by text
	rowBufs  sync.Pool             // *[2][]batchRow, Commit's row buffers
	// blockedUntil is, per channel id, just after its latest block
	// reading: a reading before it may be in a block (blocks.go).
	blockedUntil map[int64]int64
	// plans are the channels' block periods (blockspan.go), guarded by mu.
	plans map[int64]blockPlan
}

type chanKey struct{ structure, name string }

// Open opens (creating if needed) the store file at path, verifies that the
// journal mode is WAL and synchronous is NORMAL, and applies any pending
// schema migrations. A file written by a newer version of the program (a
// schema version this build does not know) is refused.
func Open(path string, opts Options) (*Store, error) {
	if path == "" {
		return nil, errors.New("store: empty database path; give a file path such as /var/lib/trussmonitor/monitor.db")
	}
	if opts.BusyTimeout <= 0 {
		opts.BusyTimeout = 5 * time.Second
	}
	if opts.MaxDeadLetters <= 0 {
		opts.MaxDeadLetters = DefaultMaxDeadLetters
	}
	if opts.ReadChunk <= 0 {
		opts.ReadChunk = time.Minute
	}
	if opts.BlockSpan < 0 || opts.BlockSpan%BlockSpan != 0 {
		return nil, fmt.Errorf("store: open %s: block period %v is not a whole number of hours; give 0 (chosen per channel from its rate) or a multiple of %v", path, opts.BlockSpan, BlockSpan)
	}
	q := url.Values{}
	q.Add("_pragma", "journal_mode(WAL)")
	q.Add("_pragma", "synchronous(NORMAL)")
	q.Add("_pragma", fmt.Sprintf("busy_timeout(%d)", opts.BusyTimeout.Milliseconds()))
	q.Add("_pragma", "foreign_keys(ON)")
	q.Set("_txlock", "immediate")
	dsn := "file:" + (&url.URL{Path: path}).EscapedPath() + "?" + q.Encode()
	db, err := sql.Open("sqlite", dsn)
	if err != nil {
		return nil, fmt.Errorf("store: open %s: %w", path, err)
	}
	s := &Store{db: db, path: path, opts: opts, channels: map[chanKey]int64{}, stmts: map[stmtKey]*sql.Stmt{}, named: map[string]*sql.Stmt{}, blockedUntil: map[int64]int64{}, plans: map[int64]blockPlan{}}
	if err := s.verifyPragmas(); err != nil {
		db.Close()
		return nil, err
	}
	if err := migrate(context.Background(), db, len(migrations)); err != nil {
		db.Close()
		return nil, fmt.Errorf("store: %s: %w", path, err)
	}
	if err := s.loadBlockHorizons(context.Background()); err != nil {
		db.Close()
		return nil, fmt.Errorf("store: %s: %w", path, err)
	}
	if err := s.loadPlans(context.Background()); err != nil {
		db.Close()
		return nil, fmt.Errorf("store: %s: %w", path, err)
	}
	return s, nil
}

// verifyPragmas reads journal_mode and synchronous back: a file on a file
// system without shared memory support silently stays in another journal
// mode, and the durability argument of ack-after-commit depends on both.
func (s *Store) verifyPragmas() error {
	ctx := context.Background()
	conn, err := s.db.Conn(ctx)
	if err != nil {
		return fmt.Errorf("store: open %s: %w", s.path, err)
	}
	defer conn.Close()
	var mode string
	if err := conn.QueryRowContext(ctx, "PRAGMA journal_mode").Scan(&mode); err != nil {
		return fmt.Errorf("store: open %s: reading journal_mode: %w", s.path, err)
	}
	if !strings.EqualFold(mode, "wal") {
		return fmt.Errorf("store: open %s: journal_mode is %q, want \"wal\"; the file system may not support WAL (network file systems do not): put the database on a local disk", s.path, mode)
	}
	var sync int
	if err := conn.QueryRowContext(ctx, "PRAGMA synchronous").Scan(&sync); err != nil {
		return fmt.Errorf("store: open %s: reading synchronous: %w", s.path, err)
	}
	if sync != 1 { // 0 OFF, 1 NORMAL, 2 FULL, 3 EXTRA
		return fmt.Errorf("store: open %s: synchronous is %d, want 1 (NORMAL)", s.path, sync)
	}
	var busy int64
	if err := conn.QueryRowContext(ctx, "PRAGMA busy_timeout").Scan(&busy); err != nil {
		return fmt.Errorf("store: open %s: reading busy_timeout: %w", s.path, err)
	}
	if busy != s.opts.BusyTimeout.Milliseconds() {
		return fmt.Errorf("store: open %s: busy_timeout is %d ms, want %d ms", s.path, busy, s.opts.BusyTimeout.Milliseconds())
	}
	return nil
}

// JournalMode reports the journal mode the file is in (always "wal" for a
// store that opened without error).
func (s *Store) JournalMode(ctx context.Context) (string, error) {
	var mode string
	err := s.db.QueryRowContext(ctx, "PRAGMA journal_mode").Scan(&mode)
	return mode, err
}

// SchemaVersion reports the schema version of the open file.
func (s *Store) SchemaVersion(ctx context.Context) (int, error) {
	return schemaVersion(ctx, s.db)
}

// Path returns the file path the store was opened with.
func (s *Store) Path() string { return s.path }

// Close closes the file. Pending transactions are rolled back.
func (s *Store) Close() error {
	s.mu.Lock()
	for k, st := range s.stmts {
		st.Close()
		delete(s.stmts, k)
	}
	for k, st := range s.named {
		st.Close()
		delete(s.named, k)
	}
	s.mu.Unlock()
	return s.db.Close()
}

// Backup writes a compact, consistent copy of the whole store to path
// (SQLite's VACUUM INTO): readings in rows and blocks, dead letters, models,
// events and results. path must not exist yet. It runs beside writers (a
// read transaction) and can be taken while the service runs.
func (s *Store) Backup(ctx context.Context, path string) error {
	if _, err := s.db.ExecContext(ctx, `VACUUM INTO ?`, path); err != nil {
		return fmt.Errorf("store: backup to %s: %w", path, err)
	}
	return nil
}
