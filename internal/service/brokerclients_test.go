package service

import (
	"regexp"
	"strconv"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
)

// TestEmbeddedBrokerClients: /metrics counts the clients connected to the
// embedded broker, one more while a logger is connected and one fewer after
// it disconnects (the service's own ingest is the other client).
func TestEmbeddedBrokerClients(t *testing.T) {
	cfg := testConfig(t, t.TempDir(), "clients-test")
	svc, _ := startService(t, cfg, nil)
	base := "http://" + svc.HTTPAddr()
	series := regexp.MustCompile(`(?m)^shm_embedded_broker_clients (\d+)$`)
	clients := func() int {
		_, m := httpGet(t, base+"/metrics")
		g := series.FindStringSubmatch(m)
		if g == nil {
			t.Fatalf("/metrics lacks shm_embedded_broker_clients:\n%s", m)
		}
		n, err := strconv.Atoi(g[1])
		if err != nil {
			t.Fatal(err)
		}
		return n
	}
	// wait polls until the count is want (the broker counts a client as it
	// attaches it; the scrape may come a moment before or after).
	wait := func(want int) {
		t.Helper()
		for n := clients(); n != want; n = clients() {
			time.Sleep(10 * time.Millisecond)
		}
	}
	wait(1) // the service's own ingest
	logger := mqtt.NewClient(mqtt.NewClientOptions().AddBroker("tcp://" + svc.BrokerAddr()).SetClientID("clients-logger"))
	if tok := logger.Connect(); !tok.WaitTimeout(30*time.Second) || tok.Error() != nil {
		t.Fatalf("logger: %v", tok.Error())
	}
	wait(2)
	logger.Disconnect(50)
	wait(1)
}
