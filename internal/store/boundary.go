package store

import (
	"context"
	"math"
	"time"
)

// The storable time range: readings are keyed by INTEGER nanoseconds since
// 1970 (an int64), which span 1677-09-21 to 2262-04-11 UTC. The range is
// that span's whole seconds less one at either end, so that rounding a time
// inside it (to the microsecond, ingest.TimeResolution) cannot leave it.
const (
	earliestStorableNs = (math.MinInt64/int64(time.Second) + 1) * int64(time.Second)
	latestStorableNs   = (math.MaxInt64/int64(time.Second) - 1) * int64(time.Second)
)

// StorableRange returns the earliest and the latest reading time the store
// keeps (1677-09-21 to 2262-04-11 UTC: the whole seconds of the int64
// nanosecond key, less one at either end). It is the one definition of that range: ingest
// refuses readings outside it (bad_time) before they reach the store.
func StorableRange() (earliest, latest time.Time) {
	return time.Unix(0, earliestStorableNs).UTC(), time.Unix(0, latestStorableNs).UTC()
}

// Storable reports whether a reading at t can be stored: t lies within
// StorableRange.
func Storable(t time.Time) bool {
	lo, hi := StorableRange()
	return !t.Before(lo) && !t.After(hi)
}

// LastReading returns the time of the latest stored reading of structure
// (rows and blocks), or ok false when it has none.
func (s *Store) LastReading(ctx context.Context, structure string) (last time.Time, ok bool, err error) {
	byChannel, err := s.LastReadings(ctx, structure, time.Time{})
	if err != nil {
		return time.Time{}, false, err
	}
	for _, t := range byChannel {
		if !ok || t.After(last) {
			last, ok = t, true
		}
	}
	return last, ok, nil
}
