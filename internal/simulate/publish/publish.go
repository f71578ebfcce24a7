// Package publish sends simulated logger readings to an MQTT broker as SenML
// packs (RFC 8428), QoS 1, pacing simulated time against wall time.
package publish

import (
	"context"
	"errors"
	"fmt"
	"iter"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/simulate"
)

// Options configures a publisher.
type Options struct {
	// Broker is the broker URL, for example tcp://127.0.0.1:1883.
	Broker string
	// Username and Password authenticate to the broker; empty for none.
	Username, Password string
	// ClientID is the MQTT client id; empty means "sim-<structure>".
	ClientID string
	// Structure names the topics: packs go to shm/<Structure>.
	Structure string
	// PerChannel publishes each reading on shm/<Structure>/<channel> as a
	// one-record pack instead of one pack per time step.
	PerChannel bool
	// Speed is simulated time per wall time: 1 is real time, 60 is one
	// simulated minute per second, 0 is as fast as possible.
	Speed float64
	// Window is how many QoS 1 publications may await their
	// acknowledgement at once; 0 means 64.
	Window int
	// Timeout bounds the connection and each acknowledgement; 0 means 30 s.
	Timeout time.Duration
	// Progress, when set, is called with the counts so far and the time
	// stamp of the step just sent, at most once a second of wall time.
	Progress func(Stats, time.Time)
	// OnBad, when set, is called before each bad message sent on purpose
	// with its defect, channel, topic and the simulated time of its step.
	OnBad func(defect simulate.Defect, channel, topic string, at time.Time)
}

// Stats counts what a publisher sent.
type Stats struct {
	// Steps is the number of time steps sent.
	Steps int
	// Messages is the number of MQTT messages acknowledged by the broker.
	Messages int
	// Readings is the number of good readings sent.
	Readings int
	// Bad is the number of bad messages sent on purpose.
	Bad int
}

// Topic returns the pack topic of a structure, shm/<structure>.
func Topic(structure string) string { return "shm/" + structure }

// ChannelTopic returns the per-channel topic shm/<structure>/<channel>.
func ChannelTopic(structure, channel string) string { return "shm/" + structure + "/" + channel }

// Run connects to the broker, sends every step of steps and disconnects. It
// stops early, returning ctx.Err(), when ctx is cancelled; the stats count
// what was acknowledged up to then.
func Run(ctx context.Context, steps iter.Seq2[simulate.Step, error], opt Options) (Stats, error) {
	p, err := connect(opt)
	if err != nil {
		return Stats{}, err
	}
	err = p.run(ctx, steps)
	if ferr := p.flush(); err == nil {
		err = ferr
	}
	p.client.Disconnect(250)
	return p.stats, err
}

// connect opens the publisher's connection.
func connect(opt Options) (*sender, error) {
	if opt.Structure == "" {
		return nil, errors.New("publish: no structure name for the topic shm/<structure>")
	}
	if opt.Timeout <= 0 {
		opt.Timeout = 30 * time.Second
	}
	if opt.Window <= 0 {
		opt.Window = 64
	}
	if opt.ClientID == "" {
		opt.ClientID = "sim-" + opt.Structure
	}
	co := mqtt.NewClientOptions().
		AddBroker(opt.Broker).
		SetClientID(opt.ClientID).
		SetUsername(opt.Username).
		SetPassword(opt.Password).
		SetCleanSession(true).
		SetAutoReconnect(true).
		SetConnectRetry(false).
		SetConnectTimeout(opt.Timeout).
		SetWriteTimeout(opt.Timeout).
		SetMaxResumePubInFlight(opt.Window)
	client := mqtt.NewClient(co)
	tok := client.Connect()
	if !tok.WaitTimeout(opt.Timeout) {
		return nil, fmt.Errorf("publish: connecting to %s: no answer within %s; is the broker running?", opt.Broker, opt.Timeout)
	}
	if err := tok.Error(); err != nil {
		return nil, fmt.Errorf("publish: connecting to %s: %w", opt.Broker, err)
	}
	return &sender{client: client, opt: opt}, nil
}

// sender holds one connection's state.
type sender struct {
	client  mqtt.Client
	opt     Options
	pending []mqtt.Token
	stats   Stats
	buf     []byte
}

func (p *sender) run(ctx context.Context, steps iter.Seq2[simulate.Step, error]) error {
	var (
		simStart  time.Time
		wallStart time.Time
		first     = true
		// lastProgress is when Progress was last called.
		lastProgress = time.Now()
	)
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	defer timer.Stop()
	for st, err := range steps {
		if err != nil {
			return fmt.Errorf("publish: simulator: %w", err)
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		if first {
			simStart, wallStart, first = st.Time, time.Now(), false
		} else if p.opt.Speed > 0 {
			due := wallStart.Add(time.Duration(float64(st.Time.Sub(simStart)) / p.opt.Speed))
			if wait := time.Until(due); wait > 0 {
				timer.Reset(wait)
				select {
				case <-ctx.Done():
					return ctx.Err()
				case <-timer.C:
				}
			}
		}
		if err := p.sendStep(st); err != nil {
			return err
		}
		p.stats.Steps++
		if p.opt.Progress != nil && time.Since(lastProgress) >= time.Second {
			lastProgress = time.Now()
			p.opt.Progress(p.stats, st.Time)
		}
	}
	return nil
}

func (p *sender) sendStep(st simulate.Step) error {
	s := p.opt.Structure
	if p.opt.PerChannel {
		for _, r := range st.Readings {
			p.buf = AppendPack(p.buf[:0], st.Time, []simulate.LoggerValue{r})
			if err := p.publish(ChannelTopic(s, r.Channel), p.buf); err != nil {
				return err
			}
		}
	} else if len(st.Readings) > 0 {
		p.buf = AppendPack(p.buf[:0], st.Time, st.Readings)
		if err := p.publish(Topic(s), p.buf); err != nil {
			return err
		}
	}
	p.stats.Readings += len(st.Readings)
	for _, r := range st.Bad {
		var payload []byte
		if r.Defect == simulate.DefectMalformed {
			payload = Malformed(st.Time, r)
		} else {
			payload = AppendPack(nil, st.Time, []simulate.LoggerValue{r})
		}
		topic := Topic(s)
		if p.opt.PerChannel {
			topic = ChannelTopic(s, r.Channel)
		}
		if p.opt.OnBad != nil {
			p.opt.OnBad(r.Defect, r.Channel, topic, st.Time)
		}
		if err := p.publish(topic, payload); err != nil {
			return err
		}
		p.stats.Bad++
	}
	return nil
}

// publish sends one QoS 1 message, keeping at most Window unacknowledged.
func (p *sender) publish(topic string, payload []byte) error {
	msg := make([]byte, len(payload))
	copy(msg, payload)
	p.pending = append(p.pending, p.client.Publish(topic, 1, false, msg))
	if len(p.pending) >= p.opt.Window {
		return p.flush()
	}
	return nil
}

// flush waits for every pending acknowledgement.
func (p *sender) flush() error {
	for i, t := range p.pending {
		if !t.WaitTimeout(p.opt.Timeout) {
			p.pending = p.pending[i:]
			return fmt.Errorf("publish: no acknowledgement from %s within %s", p.opt.Broker, p.opt.Timeout)
		}
		if err := t.Error(); err != nil {
			p.pending = p.pending[i+1:]
			return fmt.Errorf("publish: to %s: %w", p.opt.Broker, err)
		}
		p.stats.Messages++
	}
	p.pending = p.pending[:0]
	return nil
}
