package ingest

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"log/slog"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/broker"
)

// writeCert makes a key pair signed by parent (self-signed when parent is
// nil) and writes cert and key as PEM files.
func writeCert(t *testing.T, dir, name string, tmpl *x509.Certificate, parent *x509.Certificate, parentKey *ecdsa.PrivateKey) (*x509.Certificate, *ecdsa.PrivateKey) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	if parent == nil {
		parent, parentKey = tmpl, key
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, parent, &key.PublicKey, parentKey)
	if err != nil {
		t.Fatal(err)
	}
	cert, _ := x509.ParseCertificate(der)
	kb, _ := x509.MarshalECPrivateKey(key)
	os.WriteFile(filepath.Join(dir, name+".crt"), pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600)
	os.WriteFile(filepath.Join(dir, name+".key"), pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb}), 0o600)
	return cert, key
}

// TestTLSWithClientCertificateAndPassword runs ingest against the embedded
// broker over TLS with a client certificate and a password, all taken from
// the ingest config (CA file, cert and key files, user name, password).
func TestTLSWithClientCertificateAndPassword(t *testing.T) {
	dir := t.TempDir()
	now := time.Now()
	ca, caKey := writeCert(t, dir, "ca", &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "test CA"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign,
	}, nil, nil)
	writeCert(t, dir, "server", &x509.Certificate{
		SerialNumber: big.NewInt(2), Subject: pkix.Name{CommonName: "broker"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
		ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}, KeyUsage: x509.KeyUsageDigitalSignature,
	}, ca, caKey)
	writeCert(t, dir, "client", &x509.Certificate{
		SerialNumber: big.NewInt(3), Subject: pkix.Name{CommonName: "trussmonitor"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
		ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageClientAuth}, KeyUsage: x509.KeyUsageDigitalSignature,
	}, ca, caKey)

	serverCert, err := tls.LoadX509KeyPair(filepath.Join(dir, "server.crt"), filepath.Join(dir, "server.key"))
	if err != nil {
		t.Fatal(err)
	}
	pool := x509.NewCertPool()
	pool.AddCert(ca)
	b, err := broker.Start(broker.Config{
		Address: "127.0.0.1:0",
		Users:   map[string]string{"trussmonitor": "tls-test-password"},
		TLS: &tls.Config{Certificates: []tls.Certificate{serverCert}, ClientCAs: pool,
			ClientAuth: tls.RequireAndVerifyClientCert, MinVersion: tls.VersionTLS12},
	})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()

	st := openStore(t, filepath.Join(dir, "m.db"))
	base := Config{Broker: "ssl://" + b.Addr(), ClientID: "tls-test", Username: "trussmonitor", Password: "tls-test-password",
		CAFile: filepath.Join(dir, "ca.crt"), CertFile: filepath.Join(dir, "client.crt"), KeyFile: filepath.Join(dir, "client.key")}

	// Without the client certificate the broker refuses the handshake.
	noCert := base
	noCert.ClientID, noCert.CertFile, noCert.KeyFile = "tls-test-nocert", "", ""
	_, stopNoCert := startIngest(t, noCert, Deps{Store: st, Registries: alderRegistry()})
	time.Sleep(500 * time.Millisecond)
	if n := b.Clients(); n != 0 {
		t.Fatalf("%d clients connected without a client certificate", n)
	}
	stopNoCert()

	_, stop := startIngest(t, base, Deps{Store: st, Registries: alderRegistry()})
	waitClients(t, b, 1)

	// The publisher (the logger) uses the same CA, certificate and user.
	cc, err := tls.LoadX509KeyPair(filepath.Join(dir, "client.crt"), filepath.Join(dir, "client.key"))
	if err != nil {
		t.Fatal(err)
	}
	pubCfg := &tls.Config{RootCAs: pool, Certificates: []tls.Certificate{cc}, MinVersion: tls.VersionTLS12}
	pub := newTLSPublisher(t, "ssl://"+b.Addr(), "tls-test-pub", "trussmonitor", "tls-test-password", pubCfg)
	const n = 200
	for i := range n {
		if err := pub.publish("shm/alder-creek/g00", singlePayload(i)); err != nil {
			t.Fatal(err)
		}
	}
	got := waitCount(t, st, "alder-creek", n, 30*time.Second)
	if err := stop(); err != nil {
		t.Fatal(err)
	}
	if got != n {
		t.Fatalf("stored %d of %d over TLS", got, n)
	}
	checkExactlyOnce(t, st, "alder-creek", "g00", n)
}

// TestUntrustedCALogged: a broker whose certificate is not signed by the
// configured CA is refused, and the refusal is logged at once with the
// reason (issue 10, defect 2: no log line for 75 s with an untrusted CA).
func TestUntrustedCALogged(t *testing.T) {
	dir := t.TempDir()
	now := time.Now()
	caTmpl := func(serial int64, name string) *x509.Certificate {
		return &x509.Certificate{SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: name},
			NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
			IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign}
	}
	ca, caKey := writeCert(t, dir, "ca", caTmpl(1, "broker CA"), nil, nil)
	writeCert(t, dir, "other", caTmpl(2, "another CA"), nil, nil)
	writeCert(t, dir, "server", &x509.Certificate{
		SerialNumber: big.NewInt(3), Subject: pkix.Name{CommonName: "broker"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(time.Hour),
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
		ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}, KeyUsage: x509.KeyUsageDigitalSignature,
	}, ca, caKey)
	serverCert, err := tls.LoadX509KeyPair(filepath.Join(dir, "server.crt"), filepath.Join(dir, "server.key"))
	if err != nil {
		t.Fatal(err)
	}
	b, err := broker.Start(broker.Config{Address: "127.0.0.1:0", Users: map[string]string{"trussmonitor": "pw"},
		TLS: &tls.Config{Certificates: []tls.Certificate{serverCert}, MinVersion: tls.VersionTLS12}})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	var logs safeBuffer
	st := openStore(t, filepath.Join(dir, "m.db"))
	_, stop := startIngest(t, Config{Broker: "ssl://" + b.Addr(), ClientID: "untrusted", Username: "trussmonitor", Password: "pw",
		CAFile: filepath.Join(dir, "other.crt")}, Deps{Store: st, Registries: alderRegistry(), Logger: slog.New(slog.NewTextHandler(&logs, nil))})
	defer stop()
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if strings.Contains(logs.String(), "certificate signed by unknown authority") {
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	t.Fatalf("no log line naming the untrusted certificate within 60 s; log:\n%s", logs.String())
}
