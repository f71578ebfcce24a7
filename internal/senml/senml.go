// Package senml decodes Sensor Measurement Lists in their JSON representation
// (SenML, RFC 8428) into resolved records: each record carries its full name
// (base name + name), its unit (unit or base unit), its value (base value +
// value) and its absolute time (base time + time, with times below 2^28
// taken as relative to the receiver's clock).
//
// The decoder is strict where the RFC is strict (section 4: must-understand
// labels, name characters, one value per record, field types) and strict
// where this project needs it: every record must carry a numeric value
// ("v"), since every channel of a monitored structure reports a number.
// Records with only a string, boolean, data value or a sum are rejected with
// a clear error naming the record.
//
// One deviation from a general SenML receiver is deliberate: a record whose
// resolved name is empty is accepted and returned with Name "". On the topic
// shm/<structure>/<channel> the topic names the channel and the pack carries
// no names; the caller supplies the channel. RFC 8428 section 4.5.1 (from
// memory) makes the name optional only when a base name is present, so a
// caller decoding a pack for many channels (topic shm/<structure>) must
// reject records with an empty name.
package senml

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// Record is one resolved SenML record.
type Record struct {
	// Name is the resolved name bn + n; empty when the pack names neither.
	Name string
	// Unit is u, or bu when the record has no u; empty when neither is set.
	Unit string
	// Value is bv + v.
	Value float64
	// Time is the absolute time bt + t; values below 2^28 seconds are
	// relative to the now passed to Decode (RFC 8428 section 4.5.3).
	Time time.Time
}

// Reasons returned by (*Error).Reason, one per class of rejection. They are
// stable strings meant for counters and dead-letter records.
const (
	ReasonMalformedJSON    = "malformed_json"
	ReasonBadRecord        = "bad_record"
	ReasonBadName          = "bad_name"
	ReasonBadTime          = "bad_time"
	ReasonNotFinite        = "not_finite"
	ReasonUnsupportedField = "unsupported_field"
)

// Error is a decoding error. Record is the zero-based index of the record in
// the pack (-1 when the error concerns the pack as a whole) and Field the
// JSON label involved, if any.
type Error struct {
	reason string
	Record int
	Field  string
	Msg    string
	Err    error
}

// Error formats the error with the record index and field.
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString("senml: ")
	if e.Record >= 0 {
		fmt.Fprintf(&b, "record %d: ", e.Record)
	}
	if e.Field != "" {
		fmt.Fprintf(&b, "field %q: ", e.Field)
	}
	b.WriteString(e.Msg)
	if e.Err != nil {
		b.WriteString(": ")
		b.WriteString(e.Err.Error())
	}
	return b.String()
}

// Unwrap returns the underlying cause, if any.
func (e *Error) Unwrap() error { return e.Err }

// Reason returns one of "malformed_json", "bad_record", "bad_name",
// "bad_time", "not_finite", "unsupported_field".
func (e *Error) Reason() string { return e.reason }

func errf(reason string, rec int, field, format string, args ...any) *Error {
	return &Error{reason: reason, Record: rec, Field: field, Msg: fmt.Sprintf(format, args...)}
}

// SupportedVersion is the SenML version this decoder implements (RFC 8428
// section 4.4: the default base version is 10).
const SupportedVersion = 10

// relativeLimit is 2^28 seconds: resolved times below it are relative to the
// current time (RFC 8428 section 4.5.3).
const relativeLimit = 1 << 28

// maxUnixSeconds is the end of year 9999 UTC; later times are refused.
const maxUnixSeconds = 253402300799

// maxNameLen bounds a resolved name; longer names are refused as bad_name.
const maxNameLen = 256

// Decode parses a SenML JSON pack (a JSON array of records) and returns its
// resolved records in pack order. now is the receiver's time, used for
// relative times. A pack with no records is valid and yields none.
//
// Errors are *Error values naming the record and field; nothing is returned
// with an error (a pack is accepted or rejected as a whole, so a rejected
// message can go to the dead letters intact).
func Decode(payload []byte, now time.Time) ([]Record, error) {
	trimmed := bytes.TrimSpace(payload)
	if len(trimmed) == 0 {
		return nil, errf(ReasonMalformedJSON, -1, "", "empty payload; expected a JSON array of SenML records")
	}
	if trimmed[0] != '[' {
		return nil, errf(ReasonMalformedJSON, -1, "", "payload is not a JSON array; a SenML pack is an array of records, e.g. [{\"v\":1.5}]")
	}
	// The common shape (numbers, plain strings, the fields a monitoring
	// logger sends) takes a single hand-written scan; anything else, and
	// every error, goes through the general decoder below, so results and
	// error messages are those of one definition (see decodeFast).
	if recs, ok := decodeFast(trimmed, now); ok {
		return recs, nil
	}
	return decodeGeneral(trimmed, now)
}

// decodeGeneral is the reference decoder: encoding/json into maps of raw
// fields, every label and every error of RFC 8428 handled. trimmed starts
// with '['.
func decodeGeneral(trimmed []byte, now time.Time) ([]Record, error) {
	// One scan into maps of raw fields; when an element is not an object,
	// decode element by element to name the record.
	var fieldsList []map[string]json.RawMessage
	if err := json.Unmarshal(trimmed, &fieldsList); err != nil {
		var ute *json.UnmarshalTypeError
		if !errors.As(err, &ute) {
			return nil, &Error{reason: ReasonMalformedJSON, Record: -1, Msg: "invalid JSON", Err: err}
		}
		return nil, locateBadRecord(trimmed)
	}
	out := make([]Record, 0, len(fieldsList))
	var base baseState
	base.version = SupportedVersion
	for i, fields := range fieldsList {
		if fields == nil {
			return nil, errf(ReasonBadRecord, i, "", "record is null, not a JSON object")
		}
		r, err := decodeRecord(i, fields, &base, now)
		if err != nil {
			return nil, err
		}
		out = append(out, r)
	}
	return out, nil
}

// baseState holds the base fields in force; each base field applies to the
// record it appears in and to all later records until overridden (RFC 8428
// section 4.1).
type baseState struct {
	name    string
	time    float64
	unit    string
	value   float64
	sum     float64
	version int
}

// locateBadRecord finds the first element of a syntactically valid pack
// that is not a JSON object.
func locateBadRecord(pack []byte) error {
	var raws []json.RawMessage
	if err := json.Unmarshal(pack, &raws); err != nil {
		return &Error{reason: ReasonMalformedJSON, Record: -1, Msg: "invalid JSON", Err: err}
	}
	for i, raw := range raws {
		if t := bytes.TrimSpace(raw); len(t) == 0 || t[0] != '{' {
			return errf(ReasonBadRecord, i, "", "record is %s, not a JSON object", jsonKind(t))
		}
	}
	return errf(ReasonBadRecord, -1, "", "a record is not a JSON object")
}

func decodeRecord(i int, fields map[string]json.RawMessage, base *baseState, now time.Time) (Record, error) {
	// Must-understand labels first (RFC 8428 section 4.4): a label ending
	// in "_" that the receiver does not understand rejects the pack. This
	// decoder understands none.
	for k := range fields {
		if strings.HasSuffix(k, "_") {
			return Record{}, errf(ReasonUnsupportedField, i, k, "must-understand label is not supported by this receiver (RFC 8428 section 4.4); remove it or upgrade the receiver")
		}
	}
	if f, ok := fields["bver"]; ok {
		v, err := numberField(i, "bver", f)
		if err != nil {
			return Record{}, err
		}
		if v != math.Trunc(v) || v < 1 {
			return Record{}, errf(ReasonBadRecord, i, "bver", "base version %v is not a positive integer", v)
		}
		if v > SupportedVersion {
			return Record{}, errf(ReasonUnsupportedField, i, "bver", "base version %v is newer than the supported version %d", v, SupportedVersion)
		}
		base.version = int(v)
	}
	if f, ok := fields["bn"]; ok {
		s, err := stringField(i, "bn", f)
		if err != nil {
			return Record{}, err
		}
		base.name = s
	}
	if f, ok := fields["bt"]; ok {
		v, err := numberField(i, "bt", f)
		if err != nil {
			return Record{}, err
		}
		base.time = v
	}
	if f, ok := fields["bu"]; ok {
		s, err := stringField(i, "bu", f)
		if err != nil {
			return Record{}, err
		}
		base.unit = s
	}
	if f, ok := fields["bv"]; ok {
		v, err := numberField(i, "bv", f)
		if err != nil {
			return Record{}, err
		}
		base.value = v
	}
	if f, ok := fields["bs"]; ok {
		v, err := numberField(i, "bs", f)
		if err != nil {
			return Record{}, err
		}
		base.sum = v
	}

	var rec Record
	name := base.name
	if f, ok := fields["n"]; ok {
		s, err := stringField(i, "n", f)
		if err != nil {
			return Record{}, err
		}
		name += s
	}
	if err := checkName(i, name); err != nil {
		return Record{}, err
	}
	rec.Name = name

	rec.Unit = base.unit
	if f, ok := fields["u"]; ok {
		s, err := stringField(i, "u", f)
		if err != nil {
			return Record{}, err
		}
		rec.Unit = s
	}

	// Type-check the other value kinds and the sum even though this
	// receiver needs "v": a wrongly typed field is reported as such.
	nValues := 0
	for _, k := range []string{"vs", "vd"} {
		if f, ok := fields[k]; ok {
			if _, err := stringField(i, k, f); err != nil {
				return Record{}, err
			}
			nValues++
		}
	}
	if f, ok := fields["vb"]; ok {
		if k := jsonKind(f); k != "a boolean" {
			return Record{}, errf(ReasonBadRecord, i, "vb", "boolean value expected, got %s", k)
		}
		var b bool
		if err := json.Unmarshal(f, &b); err != nil {
			return Record{}, errf(ReasonBadRecord, i, "vb", "boolean value expected, got %s", jsonKind(f))
		}
		nValues++
	}
	hasSum := false
	if f, ok := fields["s"]; ok {
		if _, err := numberField(i, "s", f); err != nil {
			return Record{}, err
		}
		hasSum = true
	}
	if f, ok := fields["ut"]; ok {
		v, err := numberField(i, "ut", f)
		if err != nil {
			return Record{}, err
		}
		if v < 0 {
			return Record{}, errf(ReasonBadTime, i, "ut", "update time %v is negative", v)
		}
	}
	f, hasV := fields["v"]
	if hasV {
		nValues++
	}
	if nValues > 1 {
		return Record{}, errf(ReasonBadRecord, i, "", "record has more than one of v, vs, vb, vd (RFC 8428 allows one value per record)")
	}
	if !hasV {
		what := "no value"
		switch {
		case nValues == 1:
			what = "a string, boolean or data value but no numeric value"
		case hasSum:
			what = "a sum but no value"
		}
		return Record{}, errf(ReasonBadRecord, i, "v", "record has %s; every channel of this monitor reports a number in \"v\"", what)
	}
	v, err := numberField(i, "v", f)
	if err != nil {
		return Record{}, err
	}
	rec.Value = base.value + v
	if math.IsInf(rec.Value, 0) || math.IsNaN(rec.Value) {
		return Record{}, errf(ReasonNotFinite, i, "v", "base value + value overflows")
	}

	ts := 0.0
	if f, ok := fields["t"]; ok {
		ts, err = numberField(i, "t", f)
		if err != nil {
			return Record{}, err
		}
	}
	tm, err := resolveTime(i, base.time+ts, now)
	if err != nil {
		return Record{}, err
	}
	rec.Time = tm
	return rec, nil
}

// resolveTime applies RFC 8428 section 4.5.3: a resolved time of 2^28 or
// more is seconds since 1970-01-01T00:00:00Z; a smaller value (including
// zero and negatives) is seconds relative to now.
func resolveTime(i int, sec float64, now time.Time) (time.Time, error) {
	if math.IsInf(sec, 0) || math.IsNaN(sec) {
		return time.Time{}, errf(ReasonNotFinite, i, "t", "base time + time overflows")
	}
	if sec >= relativeLimit {
		if sec > maxUnixSeconds {
			return time.Time{}, errf(ReasonBadTime, i, "t", "time %v s is after year 9999", sec)
		}
		return secondsToTime(sec), nil
	}
	// Relative time: refuse offsets that would leave 1970..9999.
	abs := float64(now.Unix()) + sec
	if abs < 0 || abs > maxUnixSeconds {
		return time.Time{}, errf(ReasonBadTime, i, "t", "relative time %v s puts the reading outside years 1970 to 9999", sec)
	}
	whole := math.Trunc(sec)
	nanos := math.Round((sec - whole) * 1e9)
	return time.Unix(now.Unix()+int64(whole), int64(now.Nanosecond())+int64(nanos)).UTC(), nil
}

// secondsToTime converts fractional Unix seconds to a UTC time, rounded to
// the microsecond: a float64 near 1.7e9 s resolves about 0.2 microseconds,
// so finer digits are noise of the binary representation.
func secondsToTime(sec float64) time.Time {
	whole := math.Floor(sec)
	micros := math.Round((sec - whole) * 1e6)
	return time.Unix(int64(whole), int64(micros)*1000).UTC()
}

// checkName applies RFC 8428 section 4.5.1: a name consists of A-Z a-z 0-9
// - : . / _ and starts with a letter or digit. The empty name is allowed
// here (see the package comment).
func checkName(i int, name string) error {
	if name == "" {
		return nil
	}
	if len(name) > maxNameLen {
		return errf(ReasonBadName, i, "n", "name is %d bytes long; at most %d allowed", len(name), maxNameLen)
	}
	if !isAlnum(name[0]) {
		return errf(ReasonBadName, i, "n", "name %q must start with a letter or digit", clip(name))
	}
	for j := 0; j < len(name); j++ {
		c := name[j]
		if isAlnum(c) || c == '-' || c == ':' || c == '.' || c == '/' || c == '_' {
			continue
		}
		return errf(ReasonBadName, i, "n", "name %q has character %q at byte %d; allowed are A-Z a-z 0-9 - : . / _", clip(name), c, j)
	}
	return nil
}

func isAlnum(c byte) bool {
	return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9')
}

func clip(s string) string {
	if len(s) > 64 {
		return s[:64] + "..."
	}
	return s
}

func stringField(i int, field string, raw json.RawMessage) (string, error) {
	var s string
	t := bytes.TrimSpace(raw)
	if len(t) == 0 || t[0] != '"' {
		return "", errf(ReasonBadRecord, i, field, "string expected, got %s", jsonKind(t))
	}
	// The pack was validated as JSON: a string without escapes is its
	// bytes between the quotes.
	if len(t) >= 2 && bytes.IndexByte(t, '\\') < 0 {
		return string(t[1 : len(t)-1]), nil
	}
	if err := json.Unmarshal(t, &s); err != nil {
		return "", errf(ReasonBadRecord, i, field, "string expected, got %s", jsonKind(raw))
	}
	return s, nil
}

func numberField(i int, field string, raw json.RawMessage) (float64, error) {
	t := bytes.TrimSpace(raw)
	if len(t) == 0 || !(t[0] == '-' || (t[0] >= '0' && t[0] <= '9')) {
		return 0, errf(ReasonBadRecord, i, field, "number expected, got %s", jsonKind(t))
	}
	// The pack was validated as JSON, so t is a JSON number, which
	// strconv reads exactly; its only failure is a value beyond float64.
	v, err := strconv.ParseFloat(string(t), 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
			return 0, errf(ReasonNotFinite, i, field, "number %s is out of the float64 range", clip(string(t)))
		}
		return 0, &Error{reason: ReasonMalformedJSON, Record: i, Field: field, Msg: "invalid number", Err: err}
	}
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, errf(ReasonNotFinite, i, field, "number is not finite")
	}
	return v, nil
}

// jsonKind names the JSON type of a raw value for error messages.
func jsonKind(raw []byte) string {
	t := bytes.TrimSpace(raw)
	if len(t) == 0 {
		return "nothing"
	}
	switch c := t[0]; {
	case c == '{':
		return "an object"
	case c == '[':
		return "an array"
	case c == '"':
		return "a string"
	case c == 't' || c == 'f':
		return "a boolean"
	case c == 'n':
		return "null"
	case c == '-' || (c >= '0' && c <= '9'):
		return "a number"
	}
	return "invalid JSON"
}
