package ingest

import (
	"fmt"
	"path/filepath"
	"runtime"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/store"
)

// window is the most messages in flight end to end (published but not yet
// received, or stored): a closed loop, so neither broker drops anything and
// every kind of subscriber is measured the same way.
const window = 1000

// benchPublish publishes b.N messages through pub with the closed-loop
// window, waiting until done() reports them all handled.
func benchPublish(b *testing.B, pub paho.Client, topic string, payload func(i int) []byte, done func() int64) {
	b.Helper()
	payloads := make([][]byte, b.N)
	for i := range payloads {
		payloads[i] = payload(i)
	}
	b.ResetTimer()
	cpu0 := processCPU()
	start := time.Now()
	for i := 0; i < b.N; i++ {
		for int64(i)-done() >= window {
			if time.Since(start) > 5*time.Minute {
				b.Fatalf("stalled: %d published, %d handled", i, done())
			}
			runtime.Gosched()
			time.Sleep(20 * time.Microsecond)
		}
		pub.Publish(topic, 1, false, payloads[i])
	}
	for done() < int64(b.N) {
		if time.Since(start) > 5*time.Minute {
			b.Fatalf("stalled: %d of %d handled", done(), b.N)
		}
		time.Sleep(100 * time.Microsecond)
	}
	b.StopTimer()
	// CPU time of this process (publisher, ingest and, for the embedded
	// broker, the broker) per message: a figure that does not depend on
	// how many other jobs share the machine, unlike readings/s.
	b.ReportMetric(float64((processCPU()-cpu0).Microseconds())/float64(b.N), "cpu-us/msg")
}

// processCPU is the user+system CPU time used by this process so far.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

type benchBroker struct {
	addr    string
	dropped func() int64
}

func benchBrokers(b *testing.B) map[string]func(b *testing.B) benchBroker {
	return map[string]func(b *testing.B) benchBroker{
		"embedded": func(b *testing.B) benchBroker {
			br := embeddedBroker(b)
			return benchBroker{br.Addr(), br.Dropped}
		},
		// Mosquitto with the limits of deploy/mosquitto/mosquitto.conf.
		"mosquitto": func(b *testing.B) benchBroker {
			m := startOwnMosquitto(b, b.TempDir(), freePort(b))
			return benchBroker{m.addr, func() int64 { return int64(len(m.dropLines())) }}
		},
	}
}

func benchPub(b *testing.B, addr string) paho.Client {
	o := paho.NewClientOptions().AddBroker("tcp://" + addr).SetClientID(fmt.Sprintf("bench-pub-%d", time.Now().UnixNano())).
		SetAutoReconnect(false).SetWriteTimeout(10 * time.Second)
	c := paho.NewClient(o)
	if tok := c.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		b.Fatalf("publisher: %v", tok.Error())
	}
	b.Cleanup(func() { c.Disconnect(100) })
	return c
}

// BenchmarkIngest measures readings per second end to end through a real
// broker: the broker's own delivery rate to a subscriber that stores
// nothing (QoS 1, manual ack per message), then the Ingester with ack after
// commit, for one reading per message and for SenML packs of 50 readings.
// One op is one message. Run with e.g. -benchtime 20000x.
func BenchmarkIngest(b *testing.B) {
	for _, bname := range []string{"embedded", "mosquitto"} {
		for _, kind := range []struct {
			name    string
			per     int
			topic   string
			payload func(int) []byte
		}{
			{"single", 1, "shm/alder-creek/g00", singlePayload},
			{"pack50", 50, "shm/alder-creek", func(i int) []byte { return packPayload(i, 50) }},
		} {
			b.Run(fmt.Sprintf("%s/%s/broker-only", bname, kind.name), func(b *testing.B) {
				br := benchBrokers(b)[bname](b)
				var got atomic.Int64
				o := paho.NewClientOptions().AddBroker("tcp://" + br.addr).SetClientID(fmt.Sprintf("bench-sub-%d", time.Now().UnixNano())).
					SetCleanSession(false).SetAutoAckDisabled(true).SetAutoReconnect(false)
				o.SetDefaultPublishHandler(func(_ paho.Client, m paho.Message) {
					m.Ack()
					got.Add(1)
				})
				sub := paho.NewClient(o)
				if tok := sub.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
					b.Fatal(tok.Error())
				}
				defer sub.Disconnect(100)
				if tok := sub.Subscribe("shm/#", 1, nil); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
					b.Fatal(tok.Error())
				}
				benchPublish(b, benchPub(b, br.addr), kind.topic, kind.payload, got.Load)
				b.ReportMetric(float64(b.N*kind.per)/b.Elapsed().Seconds(), "readings/s")
				if d := br.dropped(); d != 0 {
					b.Errorf("broker dropped %d", d)
				}
			})
			b.Run(fmt.Sprintf("%s/%s/ingest", bname, kind.name), func(b *testing.B) {
				br := benchBrokers(b)[bname](b)
				st := openStore(b, filepath.Join(b.TempDir(), "bench.db"))
				var stored atomic.Int64
				id := fmt.Sprintf("bench-ingest-%d", time.Now().UnixNano())
				in, stop := startIngest(b, Config{Broker: "tcp://" + br.addr, ClientID: id}, Deps{
					Store: st, Registries: alderRegistry(),
					OnCommitted: func(_ string, rs []store.Reading) { stored.Add(int64(len(rs))) },
				})
				time.Sleep(300 * time.Millisecond)
				per := int64(kind.per)
				benchPublish(b, benchPub(b, br.addr), kind.topic, kind.payload, func() int64 { return stored.Load() / per })
				b.ReportMetric(float64(b.N*kind.per)/b.Elapsed().Seconds(), "readings/s")
				// Group commit at work: messages per transaction.
				b.ReportMetric(float64(in.Stats().Messages)/float64(max(in.Stats().Commits, 1)), "msgs/commit")
				if err := stop(); err != nil {
					b.Fatal(err)
				}
				if d := br.dropped(); d != 0 {
					b.Errorf("broker dropped %d", d)
				}
			})
		}
	}
}
