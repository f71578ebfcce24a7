package publish

import (
	"context"
	"fmt"
	"iter"
	"strconv"
	"time"

	"trussmonitor/internal/simulate"
)

// RunHighRate connects to the broker and sends the high-rate record as one
// SenML pack per HighRatePack on shm/<Structure>, paced by Speed like Run
// (0: as fast as the broker acknowledges); PerChannel is ignored. Stats
// count packs as Steps.
func RunHighRate(ctx context.Context, packs iter.Seq2[simulate.HighRatePack, error], opt Options) (Stats, error) {
	p, err := connect(opt)
	if err != nil {
		return Stats{}, err
	}
	err = func() error {
		var simStart, wallStart time.Time
		timer := time.NewTimer(time.Hour)
		timer.Stop()
		defer timer.Stop()
		for pk, err := range packs {
			if err != nil {
				return fmt.Errorf("publish: simulator: %w", err)
			}
			if err := ctx.Err(); err != nil {
				return err
			}
			if len(pk.Times) == 0 {
				continue
			}
			if simStart.IsZero() {
				simStart, wallStart = pk.Times[0], time.Now()
			} else if opt.Speed > 0 {
				due := wallStart.Add(time.Duration(float64(pk.Times[0].Sub(simStart)) / opt.Speed))
				if wait := time.Until(due); wait > 0 {
					timer.Reset(wait)
					select {
					case <-ctx.Done():
						return ctx.Err()
					case <-timer.C:
					}
				}
			}
			p.buf = AppendTimedPack(p.buf[:0], pk)
			if err := p.publish(Topic(opt.Structure), p.buf); err != nil {
				return err
			}
			p.stats.Steps++
			p.stats.Readings += len(pk.Times) * len(pk.Channels)
			if p.opt.Progress != nil && p.stats.Steps%1000 == 0 {
				p.opt.Progress(p.stats, pk.Times[len(pk.Times)-1])
			}
		}
		return nil
	}()
	if ferr := p.flush(); err == nil {
		err = ferr
	}
	p.client.Disconnect(250)
	return p.stats, err
}

// AppendTimedPack appends a SenML pack (RFC 8428) of many samples: the
// first record carries the base time bt (the pack's first time, exact to
// the nanosecond) and every record the offset t in seconds from it, exact
// to the nanosecond in decimal, the name n, the unit u and the value v.
//
//	[{"bn":"","bt":1780272000,"n":"B4_a","u":"/","v":1.2e-05,"t":0},{"n":"B4_b","u":"/","v":-3e-06,"t":0},{"n":"B4_a",...,"t":0.02},...]
func AppendTimedPack(dst []byte, pk simulate.HighRatePack) []byte {
	dst = append(dst, '[')
	base := pk.Times[0]
	first := true
	for i, t := range pk.Times {
		off := t.Sub(base)
		for k, ch := range pk.Channels {
			if first {
				dst = append(dst, `{"bn":"","bt":`...)
				dst = appendUnixTime(dst, base)
				dst = append(dst, ',')
				first = false
			} else {
				dst = append(dst, ",{"...)
			}
			dst = append(dst, `"n":`...)
			dst = strconv.AppendQuote(dst, ch)
			if pk.Units[k] != "" {
				dst = append(dst, `,"u":`...)
				dst = strconv.AppendQuote(dst, pk.Units[k])
			}
			dst = append(dst, `,"v":`...)
			dst = appendValue(dst, pk.Raw[i][k])
			dst = append(dst, `,"t":`...)
			dst = appendOffset(dst, off)
			dst = append(dst, '}')
		}
	}
	return append(dst, ']')
}

// appendOffset writes a non-negative duration as decimal seconds, exact.
func appendOffset(dst []byte, d time.Duration) []byte {
	return appendUnixTime(dst, time.Unix(0, int64(d)))
}
