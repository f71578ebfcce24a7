package publish

import (
	"math"
	"strconv"
	"time"

	"trussmonitor/internal/simulate"
)

// AppendPack appends a SenML pack (RFC 8428, JSON representation) holding
// the readings at time t: the first record carries the base name "" and the
// base time bt (absolute Unix time in seconds, written exactly to the
// nanosecond), each record the channel name n, the unit u and the value v.
//
//	[{"bn":"","bt":1780272000.5,"n":"B1_a","u":"mV/V","v":0.0123},{"n":"B1_b",...}]
//
// A NaN value is written as the bare token NaN, as a careless logger does;
// that makes the message invalid JSON, which is the point of that defect.
func AppendPack(dst []byte, t time.Time, readings []simulate.LoggerValue) []byte {
	dst = append(dst, '[')
	for i, r := range readings {
		if i == 0 {
			dst = append(dst, `{"bn":"","bt":`...)
			dst = appendUnixTime(dst, t)
			dst = append(dst, ',')
		} else {
			dst = append(dst, ",{"...)
		}
		dst = append(dst, `"n":`...)
		dst = strconv.AppendQuote(dst, r.Channel)
		if r.Unit != "" {
			dst = append(dst, `,"u":`...)
			dst = strconv.AppendQuote(dst, r.Unit)
		}
		dst = append(dst, `,"v":`...)
		dst = appendValue(dst, r.Value)
		dst = append(dst, '}')
	}
	return append(dst, ']')
}

// appendUnixTime writes t as decimal Unix seconds with up to nine fraction
// digits and no trailing zeros; the text is exact, unlike a float64.
func appendUnixTime(dst []byte, t time.Time) []byte {
	sec := t.Unix()
	ns := t.Nanosecond()
	dst = strconv.AppendInt(dst, sec, 10)
	if ns == 0 {
		return dst
	}
	frac := []byte(strconv.Itoa(1_000_000_000 + ns))[1:]
	for len(frac) > 0 && frac[len(frac)-1] == '0' {
		frac = frac[:len(frac)-1]
	}
	dst = append(dst, '.')
	return append(dst, frac...)
}

func appendValue(dst []byte, v float64) []byte {
	switch {
	case math.IsNaN(v):
		return append(dst, "NaN"...)
	case math.IsInf(v, 1):
		return append(dst, "Infinity"...)
	case math.IsInf(v, -1):
		return append(dst, "-Infinity"...)
	}
	return strconv.AppendFloat(dst, v, 'g', -1, 64)
}

// Malformed returns the pack for one bad reading cut off in the middle, as
// a message truncated in transit would be.
func Malformed(t time.Time, r simulate.LoggerValue) []byte {
	p := AppendPack(nil, t, []simulate.LoggerValue{r})
	return p[:len(p)/2]
}
