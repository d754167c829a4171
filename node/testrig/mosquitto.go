package testrig

import (
	"bytes"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"
)

// BrokerOptions configure a test broker.
type BrokerOptions struct {
	User, Pass    string // a password file when User != ""
	CA, Cert, Key string // a TLS listener when Cert != ""
	// Persistent keeps sessions and queued messages across restarts (autosave every second).
	Persistent bool
	// ExtraConfigLines are appended to the configuration as they are.
	ExtraConfigLines []string
}

// Mosquitto is a broker process on 127.0.0.1 that a test starts, stops and restarts.
type Mosquitto struct {
	t    testing.TB
	Dir  string
	Port int
	conf string
	mu   sync.Mutex
	cmd  *exec.Cmd
	log  *bytes.Buffer
}

// NeedMosquitto makes sure mosquitto, mosquitto_passwd and openssl exist (see the package doc
// for what happens when they do not).
func NeedMosquitto(t testing.TB) {
	t.Helper()
	need(t, "mosquitto, mosquitto-clients and openssl", "mosquitto", "mosquitto_passwd", "openssl")
}

// StartMosquitto starts a broker and stops it at the end of the test.
func StartMosquitto(t testing.TB, o BrokerOptions) *Mosquitto {
	t.Helper()
	NeedMosquitto(t)
	m := &Mosquitto{t: t, Dir: t.TempDir(), Port: FreePort(t)}
	var c strings.Builder
	// `user root`: mosquitto started as root drops to user mosquitto before reading the password
	// and key files, which it then cannot read in a 0700 test directory.
	fmt.Fprintf(&c, "per_listener_settings false\nuser root\nlog_dest stderr\nlog_type error\nlog_type warning\nlog_type notice\n")
	if o.Persistent {
		fmt.Fprintf(&c, "persistence true\npersistence_location %s/\nautosave_interval 1\nmax_queued_messages 0\n", m.Dir)
	} else {
		fmt.Fprintf(&c, "persistence false\n")
	}
	fmt.Fprintf(&c, "listener %d 127.0.0.1\n", m.Port)
	if o.User != "" {
		pw := filepath.Join(m.Dir, "passwd")
		if out, err := exec.Command("mosquitto_passwd", "-c", "-b", pw, o.User, o.Pass).CombinedOutput(); err != nil {
			t.Fatalf("mosquitto_passwd: %v\n%s", err, out)
		}
		fmt.Fprintf(&c, "allow_anonymous false\npassword_file %s\n", pw)
	} else {
		fmt.Fprintf(&c, "allow_anonymous true\n")
	}
	if o.Cert != "" {
		fmt.Fprintf(&c, "cafile %s\ncertfile %s\nkeyfile %s\n", o.CA, o.Cert, o.Key)
	}
	for _, l := range o.ExtraConfigLines {
		fmt.Fprintln(&c, l)
	}
	m.conf = filepath.Join(m.Dir, "mosquitto.conf")
	if err := os.WriteFile(m.conf, []byte(c.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	m.Start()
	t.Cleanup(m.Stop)
	return m
}

// URL returns the broker's address with scheme (tcp, ssl, mqtt ...).
func (m *Mosquitto) URL(scheme string) string {
	return fmt.Sprintf("%s://127.0.0.1:%d", scheme, m.Port)
}

// Log returns what the broker has written so far.
func (m *Mosquitto) Log() string {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.log == nil {
		return ""
	}
	return m.log.String()
}

// Start runs mosquitto in the foreground and waits until it accepts connections.
func (m *Mosquitto) Start() {
	m.t.Helper()
	m.mu.Lock()
	m.log = new(bytes.Buffer)
	m.cmd = exec.Command("mosquitto", "-c", m.conf)
	m.cmd.Stderr = m.log
	m.cmd.Stdout = m.log
	err := m.cmd.Start()
	m.mu.Unlock()
	if err != nil {
		m.t.Fatalf("starting mosquitto: %v", err)
	}
	deadline := time.Now().Add(10 * time.Second)
	for {
		c, err := net.DialTimeout("tcp", fmt.Sprintf("127.0.0.1:%d", m.Port), 200*time.Millisecond)
		if err == nil {
			_ = c.Close() // a probe that sent nothing: it has done its job
			return
		}
		if time.Now().After(deadline) {
			m.t.Fatalf("mosquitto did not start: %v\n%s", err, m.Log())
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// Stop ends mosquitto with SIGTERM (it saves its persistence file) and waits for it.
func (m *Mosquitto) Stop() {
	m.mu.Lock()
	cmd := m.cmd
	m.cmd = nil
	m.mu.Unlock()
	if cmd == nil || cmd.Process == nil {
		return
	}
	_ = cmd.Process.Signal(os.Interrupt)
	done := make(chan struct{})
	go func() { _ = cmd.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		_ = cmd.Process.Kill()
		<-done
	}
}
