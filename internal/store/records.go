package store

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"time"
	"unicode/utf8"
)

// Dead-letter bounds. A dead letter keeps enough of the payload to see
// what was wrong, never the whole of it: 1,000 malformed 60 KB messages
// would otherwise add 60 MB to the file.
const (
	// ExcerptBytes is the most of a rejected payload a dead letter keeps
	// (the first bytes); Size records how large the payload was.
	ExcerptBytes = 1024
	// DetailBytes is the most of the error message a dead letter keeps.
	DetailBytes = 1024
	// RepeatPeriod: a dead letter with the same topic, reason and excerpt
	// as one stored less than this long before (by first receipt) is
	// counted on that row (repeats, last_received) instead of stored again.
	RepeatPeriod = time.Hour
	// DefaultMaxDeadLetters caps the dead-letter rows (Options.MaxDeadLetters):
	// at most ExcerptBytes + DetailBytes + topic and bookkeeping (about
	// 2.3 KiB) a row, 50,000 rows hold at most about 115 MB. Above the cap
	// the oldest rows are dropped first (CommitResult.DeadLettersDropped).
	DefaultMaxDeadLetters = 50_000
)

// DeadLetter is a payload that was received but not accepted, with why.
type DeadLetter struct {
	Topic    string
	Received time.Time // receiver clock, first receipt
	Reason   string    // short machine-readable reason, e.g. "malformed_json"
	Detail   string    // the error message (cut to DetailBytes)
	Payload  []byte    // the payload's first ExcerptBytes at most
	// Size is the payload's length in bytes as received (0: len(Payload)).
	Size int
	// Repeats is how many times this dead letter was received within
	// RepeatPeriod of the first (1 for a single one); LastReceived is the
	// latest of them. Both are set when reading; ignored when storing.
	Repeats      int64
	LastReceived time.Time
}

// DeadLetter stores one rejected payload.
func (s *Store) DeadLetter(ctx context.Context, d DeadLetter) error {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("store: dead letter for topic %q: %w", d.Topic, err)
	}
	defer tx.Rollback()
	added, err := insertDeadLetter(ctx, tx, d)
	if err != nil {
		return err
	}
	if added > 0 {
		if _, err := s.capDeadLetters(ctx, tx); err != nil {
			return err
		}
	}
	return tx.Commit()
}

// cut returns at most n bytes of s, ending on a UTF-8 boundary.
func cut(s string, n int) string {
	if len(s) <= n {
		return s
	}
	for n > 0 && !utf8.RuneStart(s[n]) {
		n--
	}
	return s[:n]
}

// deadLetterDigest identifies repeats: topic, reason and excerpt.
func deadLetterDigest(topic, reason string, excerpt []byte) []byte {
	h := sha256.New()
	h.Write([]byte(topic))
	h.Write([]byte{0})
	h.Write([]byte(reason))
	h.Write([]byte{0})
	h.Write(excerpt)
	return h.Sum(nil)[:16]
}

// insertDeadLetter stores d, or counts it on the row of an identical dead
// letter first received within RepeatPeriod. It returns 1 when it added a
// row, 0 when it counted a repeat.
func insertDeadLetter(ctx context.Context, tx *sql.Tx, d DeadLetter) (int, error) {
	if d.Reason == "" {
		return 0, fmt.Errorf("store: dead letter for topic %q has no reason", d.Topic)
	}
	p := d.Payload
	size := d.Size
	if size < len(p) {
		size = len(p)
	}
	if len(p) > ExcerptBytes {
		p = p[:ExcerptBytes]
	}
	if p == nil {
		p = []byte{}
	}
	ts := clampNs(d.Received)
	digest := deadLetterDigest(d.Topic, d.Reason, p)
	res, err := tx.ExecContext(ctx,
		`UPDATE dead_letters SET repeats = repeats + 1, last_received = max(last_received, ?)
		 WHERE id = (SELECT id FROM dead_letters WHERE digest = ? AND received > ? AND received <= ? ORDER BY received DESC LIMIT 1)`,
		ts, digest, ts-int64(RepeatPeriod), ts)
	if err != nil {
		return 0, fmt.Errorf("store: dead letter for topic %q (%s): %w", d.Topic, d.Reason, err)
	}
	if n, _ := res.RowsAffected(); n > 0 {
		return 0, nil
	}
	_, err = tx.ExecContext(ctx,
		`INSERT INTO dead_letters (topic, received, reason, detail, payload, size, repeats, last_received, digest)
		 VALUES (?, ?, ?, ?, ?, ?, 1, ?, ?)`,
		d.Topic, ts, d.Reason, cut(d.Detail, DetailBytes), p, size, ts, digest)
	if err != nil {
		return 0, fmt.Errorf("store: dead letter for topic %q (%s): %w", d.Topic, d.Reason, err)
	}
	return 1, nil
}

// capDeadLetters drops the oldest dead-letter rows above the cap and
// returns how many it dropped.
func (s *Store) capDeadLetters(ctx context.Context, tx *sql.Tx) (int64, error) {
	limit := s.opts.MaxDeadLetters
	var n int64
	if err := tx.QueryRowContext(ctx, `SELECT count(*) FROM dead_letters`).Scan(&n); err != nil {
		return 0, fmt.Errorf("store: counting dead letters: %w", err)
	}
	if n <= int64(limit) {
		return 0, nil
	}
	res, err := tx.ExecContext(ctx,
		`DELETE FROM dead_letters WHERE id IN (SELECT id FROM dead_letters ORDER BY received, id LIMIT ?)`, n-int64(limit))
	if err != nil {
		return 0, fmt.Errorf("store: dropping the oldest dead letters above the cap of %d: %w", limit, err)
	}
	dropped, _ := res.RowsAffected()
	return dropped, nil
}

// DeadLetterFilter selects dead letters: first received in [From, To)
// (zero times unbounded), with Reason when not empty, at most Limit (<= 0:
// no limit), oldest first.
type DeadLetterFilter struct {
	From, To time.Time
	Reason   string
	Limit    int
}

// ListDeadLetters returns the dead letters that match f.
func (s *Store) ListDeadLetters(ctx context.Context, f DeadLetterFilter) ([]DeadLetter, error) {
	lo, hi := nsRange(f.From, f.To)
	limit := f.Limit
	if limit <= 0 {
		limit = -1
	}
	rows, err := s.db.QueryContext(ctx,
		`SELECT topic, received, reason, detail, payload, size, repeats, last_received FROM dead_letters
		 WHERE received >= ? AND received < ? AND (? = '' OR reason = ?) ORDER BY received, id LIMIT ?`,
		lo, hi, f.Reason, f.Reason, limit)
	if err != nil {
		return nil, fmt.Errorf("store: listing dead letters: %w", err)
	}
	defer rows.Close()
	var out []DeadLetter
	for rows.Next() {
		var d DeadLetter
		var ts, last int64
		if err := rows.Scan(&d.Topic, &ts, &d.Reason, &d.Detail, &d.Payload, &d.Size, &d.Repeats, &last); err != nil {
			return nil, fmt.Errorf("store: listing dead letters: %w", err)
		}
		d.Received = time.Unix(0, ts).UTC()
		d.LastReceived = time.Unix(0, last).UTC()
		out = append(out, d)
	}
	return out, rows.Err()
}

// DeadLetters returns up to limit dead letters received in [from, to) (zero
// times unbounded), oldest first. limit <= 0 means no limit.
func (s *Store) DeadLetters(ctx context.Context, from, to time.Time, limit int) ([]DeadLetter, error) {
	return s.ListDeadLetters(ctx, DeadLetterFilter{From: from, To: to, Limit: limit})
}

// CountDeadLetters returns the number of dead letters received per reason,
// repeats included.
func (s *Store) CountDeadLetters(ctx context.Context) (map[string]int64, error) {
	rows, err := s.db.QueryContext(ctx, `SELECT reason, sum(repeats) FROM dead_letters GROUP BY reason`)
	if err != nil {
		return nil, fmt.Errorf("store: counting dead letters: %w", err)
	}
	defer rows.Close()
	out := map[string]int64{}
	for rows.Next() {
		var r string
		var n int64
		if err := rows.Scan(&r, &n); err != nil {
			return nil, fmt.Errorf("store: counting dead letters: %w", err)
		}
		out[r] = n
	}
	return out, rows.Err()
}

// ModelVersion is one version of a structure's model file, identified by
// the SHA-256 of its content.
type ModelVersion struct {
	Structure string
	Hash      string // hex SHA-256 of Content
	Content   []byte
	FirstSeen time.Time
}

// ModelHash is the content hash PutModel uses (hex SHA-256).
func ModelHash(content []byte) string {
	h := sha256.Sum256(content)
	return hex.EncodeToString(h[:])
}

// ErrNotFound is returned (wrapped) when a requested record does not exist.
var ErrNotFound = errors.New("not found")

// PutModel records that content is the model of structure in force from
// time at on. The content is stored once per hash; a change of the model in
// force (including a return to an older version) is recorded as an
// activation, so ModelAt can tell which model a replayed epoch used.
func (s *Store) PutModel(ctx context.Context, structure string, content []byte, at time.Time) (string, error) {
	if structure == "" {
		return "", errors.New("store: PutModel: empty structure name")
	}
	hash := ModelHash(content)
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return "", fmt.Errorf("store: model of %q: %w", structure, err)
	}
	defer tx.Rollback()
	ts := clampNs(at)
	if _, err := tx.ExecContext(ctx,
		`INSERT OR IGNORE INTO models (structure, hash, content, first_seen) VALUES (?, ?, ?, ?)`,
		structure, hash, content, ts); err != nil {
		return "", fmt.Errorf("store: model of %q: %w", structure, err)
	}
	var cur string
	err = tx.QueryRowContext(ctx,
		`SELECT hash FROM model_activations WHERE structure = ? AND ts <= ? ORDER BY ts DESC LIMIT 1`,
		structure, ts).Scan(&cur)
	if err != nil && !errors.Is(err, sql.ErrNoRows) {
		return "", fmt.Errorf("store: model of %q: %w", structure, err)
	}
	if cur != hash {
		if _, err := tx.ExecContext(ctx,
			`INSERT OR REPLACE INTO model_activations (structure, ts, hash) VALUES (?, ?, ?)`,
			structure, ts, hash); err != nil {
			return "", fmt.Errorf("store: model of %q: %w", structure, err)
		}
	}
	if err := tx.Commit(); err != nil {
		return "", fmt.Errorf("store: model of %q: %w", structure, err)
	}
	return hash, nil
}

// Model returns one stored model version.
func (s *Store) Model(ctx context.Context, structure, hash string) (ModelVersion, error) {
	m := ModelVersion{Structure: structure, Hash: hash}
	var ts int64
	err := s.db.QueryRowContext(ctx,
		`SELECT content, first_seen FROM models WHERE structure = ? AND hash = ?`, structure, hash).Scan(&m.Content, &ts)
	if errors.Is(err, sql.ErrNoRows) {
		return ModelVersion{}, fmt.Errorf("store: model %s of structure %q: %w", hash, structure, ErrNotFound)
	}
	if err != nil {
		return ModelVersion{}, fmt.Errorf("store: model %s of structure %q: %w", hash, structure, err)
	}
	m.FirstSeen = time.Unix(0, ts).UTC()
	return m, nil
}

// ModelAt returns the model version of structure in force at time t.
func (s *Store) ModelAt(ctx context.Context, structure string, t time.Time) (ModelVersion, error) {
	var hash string
	err := s.db.QueryRowContext(ctx,
		`SELECT hash FROM model_activations WHERE structure = ? AND ts <= ? ORDER BY ts DESC LIMIT 1`,
		structure, clampNs(t)).Scan(&hash)
	if errors.Is(err, sql.ErrNoRows) {
		return ModelVersion{}, fmt.Errorf("store: no model of structure %q in force at %s: %w", structure, t.Format(time.RFC3339), ErrNotFound)
	}
	if err != nil {
		return ModelVersion{}, fmt.Errorf("store: model of %q at %s: %w", structure, t.Format(time.RFC3339), err)
	}
	return s.Model(ctx, structure, hash)
}

// Models returns every stored version of structure's model, oldest first.
func (s *Store) Models(ctx context.Context, structure string) ([]ModelVersion, error) {
	rows, err := s.db.QueryContext(ctx,
		`SELECT hash, content, first_seen FROM models WHERE structure = ? ORDER BY first_seen, hash`, structure)
	if err != nil {
		return nil, fmt.Errorf("store: models of %q: %w", structure, err)
	}
	defer rows.Close()
	var out []ModelVersion
	for rows.Next() {
		m := ModelVersion{Structure: structure}
		var ts int64
		if err := rows.Scan(&m.Hash, &m.Content, &ts); err != nil {
			return nil, fmt.Errorf("store: models of %q: %w", structure, err)
		}
		m.FirstSeen = time.Unix(0, ts).UTC()
		out = append(out, m)
	}
	return out, rows.Err()
}

// Event kinds.
const (
	Raised  = "raised"
	Cleared = "cleared"
)

// Event is an alarm being raised or cleared, with its evidence.
type Event struct {
	Structure string
	Rule      string
	Subject   string // member, gauge, channel or "" for the whole structure
	Kind      string // Raised or Cleared
	Time      time.Time
	Evidence  json.RawMessage // JSON object; nil stores {}
}

// PutEvent stores an alarm event.
func (s *Store) PutEvent(ctx context.Context, e Event) error {
	if e.Kind != Raised && e.Kind != Cleared {
		return fmt.Errorf("store: event %s/%s: kind %q, want %q or %q", e.Structure, e.Rule, e.Kind, Raised, Cleared)
	}
	ev := string(e.Evidence)
	if len(e.Evidence) == 0 {
		ev = "{}"
	} else if !json.Valid(e.Evidence) {
		return fmt.Errorf("store: event %s/%s: evidence is not valid JSON", e.Structure, e.Rule)
	}
	_, err := s.db.ExecContext(ctx,
		`INSERT INTO events (structure, rule, subject, kind, ts, evidence) VALUES (?, ?, ?, ?, ?, ?)`,
		e.Structure, e.Rule, e.Subject, e.Kind, clampNs(e.Time), ev)
	if err != nil {
		return fmt.Errorf("store: event %s/%s: %w", e.Structure, e.Rule, err)
	}
	return nil
}

// ReviseEvent replaces the evidence of the stored raised event of
// e.Structure, e.Rule and e.Subject at e.Time (an alarm's causes revised
// while it is active). It reports whether such a row was stored: a
// raised event already removed by retention has nothing to revise, and
// that is not an error.
func (s *Store) ReviseEvent(ctx context.Context, e Event) (bool, error) {
	if len(e.Evidence) == 0 || !json.Valid(e.Evidence) {
		return false, fmt.Errorf("store: revising event %s/%s %s at %s: evidence is not a JSON object", e.Structure, e.Rule, e.Subject, e.Time.UTC().Format(time.RFC3339Nano))
	}
	res, err := s.db.ExecContext(ctx,
		`UPDATE events SET evidence = ? WHERE structure = ? AND ts = ? AND rule = ? AND subject = ? AND kind = 'raised'`,
		string(e.Evidence), e.Structure, clampNs(e.Time), e.Rule, e.Subject)
	if err != nil {
		return false, fmt.Errorf("store: revising event %s/%s %s at %s: %w", e.Structure, e.Rule, e.Subject, e.Time.UTC().Format(time.RFC3339Nano), err)
	}
	n, err := res.RowsAffected()
	if err != nil {
		return false, fmt.Errorf("store: revising event %s/%s %s: %w", e.Structure, e.Rule, e.Subject, err)
	}
	return n > 0, nil
}

// Events returns the events of structure (all structures when "") in
// [from, to) (zero times unbounded), in time order.
func (s *Store) Events(ctx context.Context, structure string, from, to time.Time) ([]Event, error) {
	lo, hi := nsRange(from, to)
	rows, err := s.db.QueryContext(ctx,
		`SELECT structure, rule, subject, kind, ts, evidence FROM events
		 WHERE (? = '' OR structure = ?) AND ts >= ? AND ts < ? ORDER BY ts, id`,
		structure, structure, lo, hi)
	if err != nil {
		return nil, fmt.Errorf("store: events of %q: %w", structure, err)
	}
	defer rows.Close()
	var out []Event
	for rows.Next() {
		var e Event
		var ts int64
		var ev string
		if err := rows.Scan(&e.Structure, &e.Rule, &e.Subject, &e.Kind, &ts, &ev); err != nil {
			return nil, fmt.Errorf("store: events of %q: %w", structure, err)
		}
		e.Time = time.Unix(0, ts).UTC()
		e.Evidence = json.RawMessage(ev)
		out = append(out, e)
	}
	return out, rows.Err()
}

// Result is the outcome of one epoch of one structure, as JSON.
type Result struct {
	Structure string
	Time      time.Time // epoch start
	Payload   json.RawMessage
}

// PutResult stores an epoch result, replacing one stored for the same
// structure and epoch time (a replay of the same readings and model gives
// the same result).
func (s *Store) PutResult(ctx context.Context, r Result) error {
	return s.PutResults(ctx, []Result{r})
}

// PutResults stores several epoch results in one transaction.
func (s *Store) PutResults(ctx context.Context, rs []Result) error {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("store: results: %w", err)
	}
	defer tx.Rollback()
	for _, r := range rs {
		if !json.Valid(r.Payload) {
			return fmt.Errorf("store: result of %q at %s: payload is not valid JSON", r.Structure, r.Time.Format(time.RFC3339Nano))
		}
		if _, err := tx.ExecContext(ctx,
			`INSERT OR REPLACE INTO results (structure, ts, payload) VALUES (?, ?, ?)`,
			r.Structure, clampNs(r.Time), string(r.Payload)); err != nil {
			return fmt.Errorf("store: result of %q at %s: %w", r.Structure, r.Time.Format(time.RFC3339Nano), err)
		}
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("store: results: %w", err)
	}
	return nil
}

// Results calls fn for each result of structure in [from, to) (zero times
// unbounded), in time order, stopping at the first error fn returns.
func (s *Store) Results(ctx context.Context, structure string, from, to time.Time, fn func(Result) error) error {
	lo, hi := nsRange(from, to)
	rows, err := s.db.QueryContext(ctx,
		`SELECT ts, payload FROM results WHERE structure = ? AND ts >= ? AND ts < ? ORDER BY ts`, structure, lo, hi)
	if err != nil {
		return fmt.Errorf("store: results of %q: %w", structure, err)
	}
	// Collect first: fn may write to the store, and an open read cursor
	// would hold a connection meanwhile.
	var out []Result
	for rows.Next() {
		var ts int64
		var p string
		if err := rows.Scan(&ts, &p); err != nil {
			rows.Close()
			return fmt.Errorf("store: results of %q: %w", structure, err)
		}
		out = append(out, Result{Structure: structure, Time: time.Unix(0, ts).UTC(), Payload: json.RawMessage(p)})
	}
	err = rows.Err()
	rows.Close()
	if err != nil {
		return fmt.Errorf("store: results of %q: %w", structure, err)
	}
	for _, r := range out {
		if err := fn(r); err != nil {
			return err
		}
	}
	return nil
}
