package replay

import (
	"fmt"
	"io"
	"time"
)

// progress draws one status line (readings done of the total, rate, time
// left) at most five times a second; it does nothing when w is nil.
type progress struct {
	w           io.Writer
	name        string
	total       int64
	start, last time.Time
	drawn       bool
}

func newProgress(w io.Writer, name string, total int64) *progress {
	return &progress{w: w, name: name, total: total, start: time.Now()}
}

func (p *progress) update(done int64) {
	if p.w == nil {
		return
	}
	now := time.Now()
	if now.Sub(p.last) < 200*time.Millisecond {
		return
	}
	p.last = now
	p.drawn = true
	el := now.Sub(p.start).Seconds()
	rate := 0.0
	if el > 0 {
		rate = float64(done) / el
	}
	frac := 1.0
	if p.total > 0 {
		frac = float64(done) / float64(p.total)
	}
	left := "?"
	if rate > 0 && done <= p.total {
		left = time.Duration(float64(p.total-done) / rate * float64(time.Second)).Round(time.Second).String()
	}
	fmt.Fprintf(p.w, "\rreplay %s: %d of %d readings (%.1f %%), %.0f readings/s, %s left\033[K", p.name, done, p.total, 100*frac, rate, left)
}

// done clears the status line.
func (p *progress) done() {
	if p.w != nil && p.drawn {
		fmt.Fprint(p.w, "\r\033[K")
	}
}
