package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
)

// migrations are applied in order; migration i brings the schema from
// version i to version i+1. Never edit a released migration: append a new one.
var migrations = []string{
	// 1: raw readings, their channels and the dead letters.
	`CREATE TABLE channels (
		id        INTEGER PRIMARY KEY,
		structure TEXT NOT NULL,
		name      TEXT NOT NULL,
		UNIQUE (structure, name)
	);
	CREATE TABLE readings (
		channel INTEGER NOT NULL REFERENCES channels(id),
		ts      INTEGER NOT NULL, -- Unix time in nanoseconds, logger clock
		value   REAL    NOT NULL,
		PRIMARY KEY (channel, ts)
	) WITHOUT ROWID;
	CREATE TABLE dead_letters (
		id       INTEGER PRIMARY KEY,
		topic    TEXT    NOT NULL,
		received INTEGER NOT NULL, -- Unix ns, receiver clock
		reason   TEXT    NOT NULL,
		detail   TEXT    NOT NULL,
		payload  BLOB    NOT NULL
	);`,
	// 2: model versions, alarm events, per-epoch results.
	`CREATE TABLE models (
		structure  TEXT    NOT NULL,
		hash       TEXT    NOT NULL, -- SHA-256 of content, hex
		content    BLOB    NOT NULL,
		first_seen INTEGER NOT NULL,
		PRIMARY KEY (structure, hash)
	) WITHOUT ROWID;
	CREATE TABLE model_activations (
		structure TEXT    NOT NULL,
		ts        INTEGER NOT NULL,
		hash      TEXT    NOT NULL,
		PRIMARY KEY (structure, ts),
		FOREIGN KEY (structure, hash) REFERENCES models(structure, hash)
	) WITHOUT ROWID;
	CREATE TABLE events (
		id        INTEGER PRIMARY KEY,
		structure TEXT    NOT NULL,
		rule      TEXT    NOT NULL,
		subject   TEXT    NOT NULL,
		kind      TEXT    NOT NULL CHECK (kind IN ('raised', 'cleared')),
		ts        INTEGER NOT NULL,
		evidence  TEXT    NOT NULL
	);
	CREATE INDEX events_by_time ON events (structure, ts);
	CREATE TABLE results (
		structure TEXT    NOT NULL,
		ts        INTEGER NOT NULL,
		payload   TEXT    NOT NULL,
		PRIMARY KEY (structure, ts)
	) WITHOUT ROWID;`,
	// 3: time indexes used by retention and by the dead-letter listing.
	`CREATE INDEX dead_letters_by_time ON dead_letters (received);
	CREATE INDEX events_by_ts ON events (ts);`,
	// 4 (data path): dead letters keep a bounded excerpt of the payload
	// (ExcerptBytes) and its original size, and fold repeats of one topic,
	// reason and excerpt within RepeatPeriod into one row with a count and
	// the time of the last repeat. Rows written before keep their payload
	// cut to the excerpt.
	`ALTER TABLE dead_letters ADD COLUMN size INTEGER NOT NULL DEFAULT 0; -- payload bytes received
	ALTER TABLE dead_letters ADD COLUMN repeats INTEGER NOT NULL DEFAULT 1;
	ALTER TABLE dead_letters ADD COLUMN last_received INTEGER NOT NULL DEFAULT 0; -- Unix ns, receiver clock
	ALTER TABLE dead_letters ADD COLUMN digest BLOB NOT NULL DEFAULT x'';  -- SHA-256 of topic, reason, excerpt (first 16 bytes)
	UPDATE dead_letters SET size = length(payload), last_received = received,
		payload = substr(payload, 1, 1024), detail = substr(detail, 1, 1024);
	CREATE INDEX dead_letters_by_digest ON dead_letters (digest, received);`,
	// 5 (blocks): readings of closed periods in compressed blocks, one
	// per channel and BlockSpan (internal/blocks); see blocks.go.
	`CREATE TABLE reading_blocks (
		channel INTEGER NOT NULL REFERENCES channels(id),
		start   INTEGER NOT NULL, -- Unix ns, start of the block period
		first   INTEGER NOT NULL, -- Unix ns, first reading in the block
		last    INTEGER NOT NULL, -- Unix ns, last reading in the block
		n       INTEGER NOT NULL, -- readings in the block
		data    BLOB    NOT NULL, -- internal/blocks encoding
		PRIMARY KEY (channel, start)
	);`,
	// 6 (fatigue): per gauge, stress-range histograms per hour (rainflow cycles
	// per 0.5 MPa bin, sparse) and the rainflow counter's state, both written
	// in the transaction of the readings they come from.
	`CREATE TABLE fatigue_hours (
		structure TEXT    NOT NULL,
		channel   TEXT    NOT NULL,
		hour      INTEGER NOT NULL, -- Unix seconds of the hour's start, logger clock
		bin       INTEGER NOT NULL, -- stress range from bin*width to (bin+1)*width
		cycles    REAL    NOT NULL,
		PRIMARY KEY (structure, channel, hour, bin)
	) WITHOUT ROWID;
	CREATE TABLE fatigue_state (
		structure TEXT    NOT NULL,
		channel   TEXT    NOT NULL,
		last_ts   INTEGER NOT NULL, -- Unix ns of the last sample counted
		bin_width REAL    NOT NULL, -- Pa
		state     BLOB    NOT NULL, -- the counter's serialised state
		PRIMARY KEY (structure, channel)
	) WITHOUT ROWID;`,
	// 7 (staged runs): a commit's readings of one channel and one
	// StageSpan, when there are at least StageMinRun of them, as one row
	// with the run encoded (staged.go) instead of one keyed row per
	// reading; Compact moves them into reading_blocks like the keyed rows.
	// The channel's foreign key is checked by insertStaged, once per
	// channel and statement (SQLite's own check would make every
	// multi-row insert keep a statement journal).
	`CREATE TABLE staged_readings (
		id      INTEGER PRIMARY KEY,
		channel INTEGER NOT NULL, -- channels(id), see insertStaged
		first   INTEGER NOT NULL, -- Unix ns, first reading of the run
		last    INTEGER NOT NULL, -- Unix ns, last reading of the run
		n       INTEGER NOT NULL, -- readings in the run
		data    BLOB    NOT NULL  -- times and values, see encodeRun
	);
	CREATE UNIQUE INDEX staged_by_last ON staged_readings (channel, last);
	CREATE INDEX staged_by_first ON staged_readings (channel, first);`,
	// 8 (block periods): each channel's block period, chosen at its first
	// compaction from its sample interval (blockspan.go). Blocks written
	// before are one hour long: block_from is the end of a channel's last
	// one, and its periods before block_from stay hours.
	`ALTER TABLE channels ADD COLUMN block_span INTEGER; -- ns; NULL until chosen
	ALTER TABLE channels ADD COLUMN block_from INTEGER; -- Unix ns; NULL: no one-hour blocks before
	UPDATE channels SET block_from = (SELECT max(b.start) + 3600000000000 FROM reading_blocks b WHERE b.channel = channels.id);`,
}

// schemaVersion returns the version recorded in the file, 0 for a new file.
func schemaVersion(ctx context.Context, db *sql.DB) (int, error) {
	var n int
	err := db.QueryRowContext(ctx,
		`SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = 'schema_version'`).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("reading schema version: %w", err)
	}
	if n == 0 {
		return 0, nil
	}
	var v int
	err = db.QueryRowContext(ctx, `SELECT version FROM schema_version`).Scan(&v)
	if errors.Is(err, sql.ErrNoRows) {
		return 0, nil
	}
	if err != nil {
		return 0, fmt.Errorf("reading schema version: %w", err)
	}
	return v, nil
}

// migrate brings the file to version target, one migration per
// transaction, so a crash mid-upgrade leaves the file at a whole version.
func migrate(ctx context.Context, db *sql.DB, target int) error {
	if _, err := db.ExecContext(ctx, `CREATE TABLE IF NOT EXISTS schema_version (version INTEGER NOT NULL)`); err != nil {
		return fmt.Errorf("creating schema_version: %w", err)
	}
	for {
		v, err := schemaVersion(ctx, db)
		if err != nil {
			return err
		}
		if v > len(migrations) {
			return fmt.Errorf("schema version %d is newer than this program knows (%d); run the newer program or restore a backup", v, len(migrations))
		}
		if v >= target {
			return nil
		}
		if err := applyMigration(ctx, db, v); err != nil {
			return err
		}
	}
}

func applyMigration(ctx context.Context, db *sql.DB, from int) error {
	tx, err := db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("migration %d->%d: %w", from, from+1, err)
	}
	defer tx.Rollback()
	// Re-read inside the write transaction: another process may have
	// migrated between our read and our lock.
	var cur int
	err = tx.QueryRowContext(ctx, `SELECT version FROM schema_version`).Scan(&cur)
	if errors.Is(err, sql.ErrNoRows) {
		cur = 0
	} else if err != nil {
		return fmt.Errorf("migration %d->%d: %w", from, from+1, err)
	}
	if cur != from {
		return nil // someone else moved it; the caller loops
	}
	if _, err := tx.ExecContext(ctx, migrations[from]); err != nil {
		return fmt.Errorf("migration %d->%d: %w", from, from+1, err)
	}
	if _, err := tx.ExecContext(ctx, `DELETE FROM schema_version`); err != nil {
		return fmt.Errorf("migration %d->%d: %w", from, from+1, err)
	}
	if _, err := tx.ExecContext(ctx, `INSERT INTO schema_version (version) VALUES (?)`, from+1); err != nil {
		return fmt.Errorf("migration %d->%d: %w", from, from+1, err)
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("migration %d->%d: commit: %w", from, from+1, err)
	}
	return nil
}
