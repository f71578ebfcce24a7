package ingest

import (
	"fmt"
	"math"
	"time"

	"trussmonitor/internal/store"
)

// Reason is the code of a dead letter: why a payload, or a reading in it,
// was not accepted. It is the reason column of the dead-letter table and
// the reason label of shm_ingest_rejections_total. The codes of ingest's
// own are the constants below; the SenML decoder (malformed_json,
// bad_record, unsupported_field, bad_name, ...) and the sensor map
// (unknown_channel, unit_mismatch, out_of_range) add theirs, carried as
// Reason values too.
type Reason string

// Rejection reasons of ingest's own. README.md ("Messages and their
// guarantees") lists every code with its meaning.
const (
	ReasonOversized        Reason = "oversized_payload"
	ReasonBadTopic         Reason = "bad_topic"
	ReasonUnknownStructure Reason = "unknown_structure"
	ReasonUnknownChannel   Reason = "unknown_channel"
	ReasonNameMismatch     Reason = "name_mismatch"
	ReasonMissingName      Reason = "missing_name"
	ReasonAbsurdMagnitude  Reason = "absurd_magnitude"
	ReasonNotFinite        Reason = "not_finite"
	ReasonRelativeTime     Reason = "relative_time"
	ReasonTimeRange        Reason = "bad_time"
	ReasonOutsideWindow    Reason = "outside_time_window"
	ReasonConflicting      Reason = "conflicting_reading"
	ReasonEmptyPack        Reason = "empty_pack"
	ReasonInvalidReading   Reason = "invalid_reading"
)

// OwnReasons returns ingest's own reason codes (README.md lists them with
// the decoder's and the sensor map's).
func OwnReasons() []Reason {
	return []Reason{ReasonOversized, ReasonBadTopic, ReasonUnknownStructure, ReasonUnknownChannel, ReasonNameMismatch,
		ReasonMissingName, ReasonAbsurdMagnitude, ReasonNotFinite, ReasonRelativeTime, ReasonTimeRange, ReasonOutsideWindow,
		ReasonConflicting, ReasonEmptyPack}
}

// UnknownStructureLabel is the structure label under which messages for
// structures that are not configured (and topics that match none of the
// subscriptions) are counted, so that a publisher cannot create label
// values (metric series) at will.
const UnknownStructureLabel = "_unknown_"

// TimeResolution is the resolution of a reading's time as stored and
// keyed: SenML times are float64 seconds since 1970, which resolve about
// 0.24 us today (PROBES.md), so times are rounded to the microsecond. Two
// readings of one channel whose times round to the same microsecond have
// one key: the same value is a redelivery, a different value a
// conflicting_reading.
const TimeResolution = time.Microsecond

// Defaults of the time window around the receiver's clock.
const (
	// DefaultMaxAhead: a reading stamped more than 10 minutes after the
	// receiver's clock is refused (a logger clock gone wrong; a reading
	// from the future would hold the channel's silence alarm off).
	DefaultMaxAhead = 10 * time.Minute
	// DefaultMaxBehind: a reading stamped more than 30 days before the
	// receiver's clock is refused; a logger's backlog after an outage
	// lies well within it (common practice: loggers buffer days to weeks).
	// Older data is loaded with `monitor import`, whose backlog is not
	// limited unless --max-age is given.
	DefaultMaxBehind = 30 * 24 * time.Hour
)

// DefaultMaxAbsValue is the default magnitude above which a reading is
// absurd_magnitude (before the sensor map's own range check).
const DefaultMaxAbsValue = 1e12


// Limits are the acceptance rules of one reading, apart from the sensor
// map's own (units, ranges).
type Limits struct {
	// MaxAbsValue refuses readings of larger magnitude (absurd_magnitude).
	MaxAbsValue float64
	// MaxAhead and MaxBehind bound the reading's time around the
	// receiver's clock (outside_time_window). Zero MaxAhead or MaxBehind
	// means no bound on that side.
	MaxAhead, MaxBehind time.Duration
}

// Rejection says why a reading was not accepted.
type Rejection struct {
	Reason Reason
	Detail string
}

// Admit is the one accept-or-dead-letter decision for a single reading,
// used by MQTT ingest and by `monitor import`: it returns the reading as it
// is stored (time rounded to TimeResolution) or why it is refused. now is
// the receiver's clock. Checks, in order: finite value, magnitude, time
// storable (bad_time), time inside the window (outside_time_window), then
// the sensor map (unknown_channel, unit_mismatch, out_of_range).
func Admit(l Limits, reg Registry, channel, unit string, t time.Time, value float64, now time.Time) (store.Reading, *Rejection) {
	reject := func(r Reason, format string, args ...any) (store.Reading, *Rejection) {
		return store.Reading{}, &Rejection{Reason: r, Detail: fmt.Sprintf("channel %q: ", channel) + fmt.Sprintf(format, args...)}
	}
	if math.IsNaN(value) || math.IsInf(value, 0) {
		return reject(ReasonNotFinite, "value %v is not finite", value)
	}
	if l.MaxAbsValue > 0 && math.Abs(value) > l.MaxAbsValue {
		return reject(ReasonAbsurdMagnitude, "|value| %g exceeds max_abs_value %g", value, l.MaxAbsValue)
	}
	// The time as stored (rounded) must lie in the store's range.
	if rt := t.Round(TimeResolution).UTC(); !store.Storable(rt) {
		lo, hi := store.StorableRange()
		return reject(ReasonTimeRange, "time %s outside %s to %s, the range the store keeps; check the logger's clock", t.Format(time.RFC3339Nano), lo.Format(time.DateOnly), hi.Format(time.DateOnly))
	}
	t = t.Round(TimeResolution).UTC()
	if l.MaxAhead > 0 && t.After(now.Add(l.MaxAhead)) {
		return reject(ReasonOutsideWindow, "time %s is %s ahead of the receiver's clock %s, more than the %s allowed (max_ahead); check the logger's clock",
			t.Format(time.RFC3339Nano), t.Sub(now).Round(time.Second), now.UTC().Format(time.RFC3339), l.MaxAhead)
	}
	if l.MaxBehind > 0 && t.Before(now.Add(-l.MaxBehind)) {
		return reject(ReasonOutsideWindow, "time %s is %s behind the receiver's clock %s, more than the %s backlog allowed (max_behind); check the logger's clock, or load old data with monitor import",
			t.Format(time.RFC3339Nano), now.Sub(t).Round(time.Second), now.UTC().Format(time.RFC3339), l.MaxBehind)
	}
	if reg != nil {
		if err := reg.Validate(channel, unit, value); err != nil {
			return store.Reading{}, &Rejection{Reason: reasonOf(err, ReasonInvalidReading), Detail: err.Error()}
		}
	}
	return store.Reading{Channel: channel, Time: t, Value: value}, nil
}
