package main

import (
	"crypto/tls"
	"crypto/x509"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
)

// TestFleetBridge runs the example fleet configuration of deploy/fleet with real mosquitto
// brokers on 127.0.0.1: a central broker (central.conf, leqnode-central.acl) and a site gateway
// (site-gateway.conf, leqnode-site.acl) bridged to it over TLS. Only the addresses, ports and
// file paths are changed, line by line, so that a change to an example line the test depends on
// fails here. It checks what docs/collector.md promises: node records cross the bridge in
// order; a node cannot publish under another node's id; commands come back to the node they
// name; and records a node hands to the gateway while the uplink is down reach a consumer's
// persistent session once the uplink returns, none lost and in order.
func TestFleetBridge(t *testing.T) {
	need(t, "mosquitto", "mosquitto_pub", "mosquitto_passwd", "openssl")
	root := repoRoot(t)
	dir := t.TempDir()
	ca := makeCerts(t, dir)
	pCentral, pGateway := freePort(t), freePort(t)

	for _, u := range [][2]string{{"bridge-wendle-cross-north", "change-me-north"}, {"wendle-cross-collector", "collector-pw"}} {
		mustRun(t, "mosquitto_passwd", "-b", ensureFile(t, filepath.Join(dir, "central.passwd")), u[0], u[1])
	}
	for _, u := range [][2]string{{"wendle-cross-01", "pw-01"}, {"wendle-cross-02", "pw-02"}} {
		mustRun(t, "mosquitto_passwd", "-b", ensureFile(t, filepath.Join(dir, "site.passwd")), u[0], u[1])
	}
	copyFile(t, filepath.Join(root, "deploy/fleet/leqnode-central.acl"), filepath.Join(dir, "central.acl"))
	copyFile(t, filepath.Join(root, "deploy/fleet/leqnode-site.acl"), filepath.Join(dir, "site.acl"))
	for _, d := range []string{"central-data", "gateway-data"} {
		if err := os.Mkdir(filepath.Join(dir, d), 0o700); err != nil {
			t.Fatal(err)
		}
	}
	// Started as root, mosquitto drops to the user mosquitto before reading its files, which sit
	// in a private temporary directory: keep it root.
	central := rewriteConf(t, filepath.Join(root, "deploy/fleet/central.conf"), map[string]string{
		"persistence_location /var/lib/mosquitto/": "persistence_location " + filepath.Join(dir, "central-data") + "/",
		"listener 8883": fmt.Sprintf("user root\nlistener %d 127.0.0.1", pCentral),
		"certfile /etc/mosquitto/certs/central.crt":           "certfile " + filepath.Join(dir, "server.crt"),
		"keyfile /etc/mosquitto/certs/central.key":            "keyfile " + filepath.Join(dir, "server.key"),
		"password_file /etc/mosquitto/leqnode-central.passwd": "password_file " + filepath.Join(dir, "central.passwd"),
		"acl_file /etc/mosquitto/leqnode-central.acl":         "acl_file " + filepath.Join(dir, "central.acl"),
	})
	gateway := rewriteConf(t, filepath.Join(root, "deploy/fleet/site-gateway.conf"), map[string]string{
		"persistence_location /var/lib/mosquitto/": "persistence_location " + filepath.Join(dir, "gateway-data") + "/",
		"listener 8883": fmt.Sprintf("user root\nlistener %d 127.0.0.1", pGateway),
		"certfile /etc/mosquitto/certs/gateway-north.crt":        "certfile " + filepath.Join(dir, "server.crt"),
		"keyfile /etc/mosquitto/certs/gateway-north.key":         "keyfile " + filepath.Join(dir, "server.key"),
		"password_file /etc/mosquitto/leqnode-site.passwd":       "password_file " + filepath.Join(dir, "site.passwd"),
		"acl_file /etc/mosquitto/leqnode-site.acl":               "acl_file " + filepath.Join(dir, "site.acl"),
		"address central.wendle-cross.example:8883":              fmt.Sprintf("address 127.0.0.1:%d", pCentral),
		"bridge_cafile /etc/mosquitto/certs/wendle-cross-ca.crt": "bridge_cafile " + ca,
		"restart_timeout 2 120":                                  "restart_timeout 1 2",
	})
	centralConf, gatewayConf := filepath.Join(dir, "central.conf"), filepath.Join(dir, "gateway.conf")
	writeFile(t, centralConf, central)
	writeFile(t, gatewayConf, gateway)

	stopCentral := startBroker(t, centralConf, pCentral)
	startBroker(t, gatewayConf, pGateway)

	// The collector: a consumer on the central broker with a persistent session.
	got := make(chan string, 100)
	collector := connect(t, ca, pCentral, "wendle-cross-collector", "collector-pw", "collector-1", false)
	subscribe(t, collector, "leqnode/+/live/#", got)
	bridgeUp := make(chan string, 10)
	subscribe(t, collector, "leqnode/_bridge/wendle-cross-north/state", bridgeUp)
	waitFor(t, bridgeUp, "1", "the bridge's retained state on the central broker")

	nodePub := func(user, pw, topic, payload string) {
		t.Helper()
		mustRun(t, "mosquitto_pub", "-h", "127.0.0.1", "-p", fmt.Sprint(pGateway), "--cafile", ca,
			"-u", user, "-P", pw, "-i", "pub-"+user, "-q", "1", "-t", topic, "-m", payload)
	}
	// A node may publish only under its own id (pattern write leqnode/%u/#).
	nodePub("wendle-cross-02", "pw-02", "leqnode/wendle-cross-01/live/minute", "spoofed")
	nodePub("wendle-cross-01", "pw-01", "leqnode/wendle-cross-01/live/minute", "01-a")
	nodePub("wendle-cross-02", "pw-02", "leqnode/wendle-cross-02/live/minute", "02-a")
	expect(t, got, "leqnode/wendle-cross-01/live/minute 01-a", "leqnode/wendle-cross-02/live/minute 02-a")

	// Commands travel back to the node they name, and only to it.
	cmds01, cmds02 := make(chan string, 10), make(chan string, 10)
	node01 := connect(t, ca, pGateway, "wendle-cross-01", "pw-01", "leqnode-wendle-cross-01", true)
	subscribe(t, node01, "leqnode/wendle-cross-01/command", cmds01)
	node02 := connect(t, ca, pGateway, "wendle-cross-02", "pw-02", "leqnode-wendle-cross-02", true)
	subscribe(t, node02, "leqnode/wendle-cross-01/command", cmds02)
	time.Sleep(500 * time.Millisecond) // the bridge forwards the new subscription's topic (static list)
	cmd := `{"schema_version":1,"id":"req-1","action":"publish_status"}`
	if tok := collector.Publish("leqnode/wendle-cross-01/command", 1, false, cmd); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("collector's command publish: %v", tok.Error())
	}
	expect(t, cmds01, "leqnode/wendle-cross-01/command "+cmd)
	select {
	case m := <-cmds02:
		t.Errorf("node wendle-cross-02 read another node's command: %s", m)
	case <-time.After(time.Second):
	}

	// Uplink outage: the central broker goes away; records the node hands to the gateway wait
	// in its queue and reach the collector's persistent session, in order, when it returns.
	stopCentral()
	for i := range 5 {
		nodePub("wendle-cross-01", "pw-01", "leqnode/wendle-cross-01/live/second", fmt.Sprintf("outage-%d", i))
	}
	startBroker(t, centralConf, pCentral)
	var want []string
	for i := range 5 {
		want = append(want, fmt.Sprintf("leqnode/wendle-cross-01/live/second outage-%d", i))
	}
	expect(t, got, want...)
}

// expect waits for the messages ("topic payload"), in this order, and nothing else before them.
func expect(t *testing.T, ch <-chan string, want ...string) {
	t.Helper()
	for i, w := range want {
		select {
		case m := <-ch:
			if m != w {
				t.Fatalf("message %d: got %q, want %q", i, m, w)
			}
		case <-time.After(30 * time.Second):
			t.Fatalf("message %d (%q) did not arrive within 30 s", i, w)
		}
	}
}

func waitFor(t *testing.T, ch <-chan string, payload, what string) {
	t.Helper()
	deadline := time.After(30 * time.Second)
	for {
		select {
		case m := <-ch:
			if strings.HasSuffix(m, " "+payload) {
				return
			}
		case <-deadline:
			t.Fatalf("%s: no %q within 30 s", what, payload)
		}
	}
}

func connect(t *testing.T, caFile string, port int, user, pw, id string, clean bool) mqtt.Client {
	t.Helper()
	pem, err := os.ReadFile(caFile)
	if err != nil {
		t.Fatal(err)
	}
	pool := x509.NewCertPool()
	pool.AppendCertsFromPEM(pem)
	o := mqtt.NewClientOptions().AddBroker(fmt.Sprintf("ssl://127.0.0.1:%d", port)).
		SetTLSConfig(&tls.Config{RootCAs: pool, MinVersion: tls.VersionTLS12}).
		SetUsername(user).SetPassword(pw).SetClientID(id).SetCleanSession(clean).
		SetAutoReconnect(true).SetMaxReconnectInterval(time.Second).SetConnectTimeout(10 * time.Second)
	c := mqtt.NewClient(o)
	if tok := c.Connect(); !tok.WaitTimeout(20*time.Second) || tok.Error() != nil {
		t.Fatalf("connecting %s to 127.0.0.1:%d: %v", user, port, tok.Error())
	}
	t.Cleanup(func() { c.Disconnect(100) })
	return c
}

func subscribe(t *testing.T, c mqtt.Client, topic string, ch chan<- string) {
	t.Helper()
	tok := c.Subscribe(topic, 1, func(_ mqtt.Client, m mqtt.Message) {
		select {
		case ch <- m.Topic() + " " + string(m.Payload()):
		default:
		}
	})
	if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("subscribing to %s: %v", topic, tok.Error())
	}
}

// startBroker starts mosquitto on a config file and waits until it accepts connections; the
// function returned stops it (SIGTERM: it saves its persistence file), as does the cleanup.
func startBroker(t *testing.T, conf string, port int) func() {
	t.Helper()
	cmd := exec.Command("mosquitto", "-c", conf)
	logf, err := os.Create(conf + fmt.Sprintf(".%d.log", time.Now().UnixNano()))
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stdout, cmd.Stderr = logf, logf
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	var once sync.Once
	stop := func() {
		once.Do(func() {
			cmd.Process.Signal(os.Interrupt)
			done := make(chan error, 1)
			go func() { done <- cmd.Wait() }()
			select {
			case <-done:
			case <-time.After(10 * time.Second):
				cmd.Process.Kill()
				<-done
			}
			logf.Close()
		})
	}
	t.Cleanup(stop)
	deadline := time.Now().Add(15 * time.Second)
	for {
		c, err := net.DialTimeout("tcp", fmt.Sprintf("127.0.0.1:%d", port), time.Second)
		if err == nil {
			c.Close()
			return stop
		}
		if time.Now().After(deadline) {
			b, _ := os.ReadFile(logf.Name())
			t.Fatalf("mosquitto -c %s did not listen on %d: %s", conf, port, b)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

// rewriteConf returns the example file with each line given replaced, failing when one of them
// is not in the file exactly once.
func rewriteConf(t *testing.T, path string, repl map[string]string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(b), "\n")
	for from, to := range repl {
		n := 0
		for i, l := range lines {
			if l == from {
				lines[i] = to
				n++
			}
		}
		if n != 1 {
			t.Fatalf("%s: the line %q is there %d times, want once (the test rewrites it)", path, from, n)
		}
	}
	return strings.Join(lines, "\n")
}

// makeCerts makes a test CA and a server certificate for 127.0.0.1 with openssl and returns
// the CA's file.
func makeCerts(t *testing.T, dir string) string {
	t.Helper()
	p := func(n string) string { return filepath.Join(dir, n) }
	ext := p("san.ext")
	writeFile(t, ext, "subjectAltName=DNS:localhost,IP:127.0.0.1\n")
	mustRun(t, "openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj", "/CN=Wendle Cross test CA",
		"-keyout", p("ca.key"), "-out", p("ca.crt"))
	mustRun(t, "openssl", "req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=localhost", "-keyout", p("server.key"), "-out", p("server.csr"))
	mustRun(t, "openssl", "x509", "-req", "-in", p("server.csr"), "-CA", p("ca.crt"), "-CAkey", p("ca.key"), "-CAcreateserial",
		"-days", "2", "-extfile", ext, "-out", p("server.crt"))
	return p("ca.crt")
}

func freePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

func writeFile(t *testing.T, p, s string) {
	t.Helper()
	if err := os.WriteFile(p, []byte(s), 0o600); err != nil {
		t.Fatal(err)
	}
}

func ensureFile(t *testing.T, p string) string {
	t.Helper()
	if _, err := os.Stat(p); err != nil {
		writeFile(t, p, "")
	}
	return p
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	b, err := os.ReadFile(from)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, to, string(b))
}
