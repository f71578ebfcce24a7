package service

import (
	"context"
	"net/http"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/config"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
)

// waitStored polls the store until it holds want readings of structure in
// [from, to). It waits as long as the count keeps growing (a loaded machine
// is slow, not stuck) and fails after a minute without progress.
func waitStored(t *testing.T, svc *Service, structure string, from, to time.Time, want int64) int64 {
	t.Helper()
	ctx := context.Background()
	var last int64 = -1
	lastChange := time.Now()
	for {
		n, err := svc.Store().CountReadings(ctx, structure, from, to)
		if err != nil {
			t.Fatal(err)
		}
		if n >= want {
			return n
		}
		if n != last {
			last, lastChange = n, time.Now()
		}
		if time.Since(lastChange) > time.Minute {
			t.Fatalf("%s: %d of %d readings stored, no progress for a minute", structure, n, want)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// waitSubscribedNow waits until the service's ingest has confirmed its
// subscription (no probe message: a probe would be a dead letter).
func waitSubscribedNow(t *testing.T, svc *Service) {
	t.Helper()
	deadline := time.Now().Add(3 * time.Minute) // generous: only ends a hung test
	for svc.ingester.Stats().Subscribed == 0 {
		if time.Now().After(deadline) {
			t.Fatal("the service did not subscribe")
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// simulated publishes d of simulated readings of mon from start through
// the broker at addr and returns the number of readings published.
func simulated(t *testing.T, mon *instrumented.Structure, addr string, start time.Time, d time.Duration, seed uint64, client string) int64 {
	t.Helper()
	opt := simulate.DefaultOptions()
	opt.Seed, opt.Start, opt.Duration, opt.Rate, opt.BadRate = seed, start, d, time.Second, 0
	gen, err := simulate.New(mon.Structure, mon.Sensors, opt)
	if err != nil {
		t.Fatal(err)
	}
	st, err := publish.Run(context.Background(), gen.All(), publish.Options{Broker: "tcp://" + addr, Structure: mon.Structure.Name, ClientID: client})
	if err != nil {
		t.Fatal(err)
	}
	return int64(st.Readings)
}

// TestTwoInstancesOneBroker: two service instances, one serving the
// footbridge (alder-creek) and one the roof (harbour-hall), against one
// broker (the project's MQTT broker, standalone on a loopback port, reached
// over TCP like any broker) (deploy/README.md, Scaling out). Each stores
// only its own structure's readings, sees nothing of the other's (no dead
// letter), exports metrics labelled by its own structure only, and stopping
// one leaves the other storing and reconciling.
//
// Before the fix each instance subscribed to every structure's topics
// (shm/+ and shm/+/+) and dead-lettered every message of the other
// structure as unknown_structure.
func TestTwoInstancesOneBroker(t *testing.T) {
	brk, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		t.Fatal(err)
	}
	defer brk.Close()
	type inst struct {
		name, file string
		mon        *instrumented.Structure
		svc        *Service
		stop       func()
	}
	insts := []*inst{
		{name: "alder-creek", file: "footbridge"},
		{name: "harbour-hall", file: "roof"},
	}
	for _, in := range insts {
		dir := "../../testdata/" + in.file + "/"
		mon, err := instrumented.Load(dir+"structure.yaml", dir+"sensors.yaml")
		if err != nil {
			t.Fatal(err)
		}
		in.mon = mon
		in.svc, _, in.stop = startStoppable(t, func(c *config.Config) {
			c.Broker.Embedded = false
			c.Broker.URL = "tcp://" + brk.Addr()
			c.Broker.ClientID = "monitor-" + in.name
			c.Ingest.Subscribe = "configured" // deploy/README.md, Scaling out
			c.Structures = []config.Structure{{Structure: dir + "structure.yaml", Sensors: dir + "sensors.yaml"}}
		}, Options{})
	}
	for _, in := range insts {
		waitSubscribedNow(t, in.svc)
	}
	start := time.Now().UTC().Add(-30 * time.Minute).Truncate(time.Second)
	const d = 2 * time.Minute
	ctx := context.Background()
	for i, in := range insts {
		want := simulated(t, in.mon, brk.Addr(), start, d, uint64(40+i), "logger-"+in.name)
		got := waitStored(t, in.svc, in.name, start, start.Add(d), want)
		t.Logf("%s: published %d readings, stored %d", in.name, want, got)
	}
	// Each stores its own structure only, and nothing of the other's.
	for i, in := range insts {
		other := insts[1-i].name
		if n, _ := in.svc.Store().CountReadings(ctx, other, start, start.Add(time.Hour)); n != 0 {
			t.Errorf("instance of %s stored %d readings of %s", in.name, n, other)
		}
		dl, err := in.svc.Store().CountDeadLetters(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for reason, n := range dl {
			if n > 0 {
				t.Errorf("instance of %s has %d dead letters (%s): it received the other structure's messages", in.name, n, reason)
			}
		}
		_, m := httpGet(t, "http://"+in.svc.HTTPAddr()+"/metrics")
		if !strings.Contains(m, `shm_epochs_total{outcome="accepted",structure="`+in.name+`"}`) {
			t.Errorf("instance of %s: /metrics has no accepted epochs labelled structure=%q", in.name, in.name)
		}
		if strings.Contains(m, `structure="`+other+`"`) {
			t.Errorf("instance of %s: /metrics has series labelled structure=%q", in.name, other)
		}
	}
	// Stop the footbridge's instance; the roof's carries on.
	a, b := insts[0], insts[1]
	a.stop()
	epochsBefore := b.svc.Pipeline(b.name).Stats().Epochs
	start2 := start.Add(d)
	want := simulated(t, b.mon, brk.Addr(), start2, time.Minute, 50, "logger-"+b.name+"-2")
	waitStored(t, b.svc, b.name, start2, start2.Add(time.Minute), want)
	// Also the other structure's logger goes on publishing to the broker
	// while its monitor is down (its persistent session queues them).
	simulated(t, a.mon, brk.Addr(), start2, 10*time.Second, 51, "logger-"+a.name+"-2")
	deadline := time.Now().Add(3 * time.Minute) // only ends a hung test
	for b.svc.Pipeline(b.name).Stats().Epochs < epochsBefore+59 {
		if time.Now().After(deadline) {
			t.Fatalf("roof instance: %d epochs after the footbridge's instance stopped, want about 60", b.svc.Pipeline(b.name).Stats().Epochs-epochsBefore)
		}
		time.Sleep(50 * time.Millisecond)
	}
	if code, body := httpGet(t, "http://"+b.svc.HTTPAddr()+"/readyz"); code != http.StatusOK {
		t.Errorf("roof instance /readyz after the other stopped: %d %s", code, body)
	}
	if dl, _ := b.svc.Store().CountDeadLetters(ctx); len(dl) > 0 {
		for reason, n := range dl {
			if n > 0 {
				t.Errorf("roof instance: %d dead letters (%s) after the other stopped", n, reason)
			}
		}
	}
}
