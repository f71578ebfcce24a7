package store

import (
	"context"
	"fmt"
	"time"
)

// Class names a group of tables that share one retention period.
type Class string

// Table classes for retention. Model versions are never pruned: a replay of
// any stored period must find the model that was in force.
const (
	ClassReadings    Class = "readings"     // raw readings (by logger time)
	ClassDeadLetters Class = "dead_letters" // rejected payloads (by receive time)
	ClassEvents      Class = "events"       // alarm events (by event time)
	ClassResults     Class = "results"      // per-epoch results (by epoch time)
)

// Retention is how long each class is kept; zero keeps it forever.
type Retention struct {
	Readings    time.Duration
	DeadLetters time.Duration
	Events      time.Duration
	Results     time.Duration
}

// Prune deletes the rows of class older than before and returns how many it
// deleted. Readings are deleted one channel at a time, along the primary key.
func (s *Store) Prune(ctx context.Context, class Class, before time.Time) (int64, error) {
	ts := clampNs(before)
	var q string
	switch class {
	case ClassReadings:
		return s.pruneReadings(ctx, ts)
	case ClassDeadLetters:
		q = `DELETE FROM dead_letters WHERE received < ?`
	case ClassEvents:
		q = `DELETE FROM events WHERE ts < ?`
	case ClassResults:
		q = `DELETE FROM results WHERE ts < ?`
	default:
		return 0, fmt.Errorf("store: prune: unknown table class %q; use one of %q, %q, %q, %q",
			class, ClassReadings, ClassDeadLetters, ClassEvents, ClassResults)
	}
	res, err := s.db.ExecContext(ctx, q, ts)
	if err != nil {
		return 0, fmt.Errorf("store: prune %s: %w", class, err)
	}
	n, _ := res.RowsAffected()
	return n, nil
}

func (s *Store) pruneReadings(ctx context.Context, ts int64) (int64, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT id FROM channels`)
	if err != nil {
		return 0, fmt.Errorf("store: prune readings: %w", err)
	}
	var ids []int64
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id); err != nil {
			rows.Close()
			return 0, fmt.Errorf("store: prune readings: %w", err)
		}
		ids = append(ids, id)
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return 0, fmt.Errorf("store: prune readings: %w", err)
	}
	var total int64
	for _, id := range ids {
		res, err := s.db.ExecContext(ctx, `DELETE FROM readings WHERE channel = ? AND ts < ?`, id, ts)
		if err != nil {
			return total, fmt.Errorf("store: prune readings of channel id %d: %w", id, err)
		}
		n, _ := res.RowsAffected()
		total += n
		nb, err := s.pruneBlocks(ctx, id, ts)
		if err != nil {
			return total, err
		}
		total += nb
		ns, err := s.pruneStaged(ctx, id, ts)
		if err != nil {
			return total, err
		}
		total += ns
	}
	return total, nil
}

// ApplyRetention prunes every class with a non-zero period relative to now
// and returns the deleted row counts per class.
func (s *Store) ApplyRetention(ctx context.Context, now time.Time, r Retention) (map[Class]int64, error) {
	out := map[Class]int64{}
	for _, c := range []struct {
		class Class
		keep  time.Duration
	}{
		{ClassReadings, r.Readings},
		{ClassDeadLetters, r.DeadLetters},
		{ClassEvents, r.Events},
		{ClassResults, r.Results},
	} {
		if c.keep <= 0 {
			continue
		}
		n, err := s.Prune(ctx, c.class, now.Add(-c.keep))
		out[c.class] = n
		if err != nil {
			return out, err
		}
	}
	return out, nil
}
