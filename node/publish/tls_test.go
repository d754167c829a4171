package publish

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
	"github.com/leqnode/leqnode/node/testrig"
)

// pki is a test certificate authority made with openssl, a broker certificate for 127.0.0.1
// and localhost, a client certificate, and a second, unrelated authority.
type pki struct {
	dir                                  string
	ca, serverCert, serverKey            string
	clientCert, clientKey, otherCA, pass string
}

func openssl(t *testing.T, dir string, args ...string) {
	t.Helper()
	cmd := exec.Command("openssl", args...)
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("openssl %s: %v\n%s", strings.Join(args, " "), err, out)
	}
}

func makePKI(t *testing.T) pki {
	t.Helper()
	needTools(t)
	d := t.TempDir()
	ec := []string{"-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1", "-nodes"}
	ca := func(name string) {
		openssl(t, d, append(append([]string{"req", "-x509"}, ec...), "-keyout", name+".key", "-out", name+".crt", "-days", "2", "-subj", "/CN=Wendle Cross test CA "+name)...)
	}
	ca("ca")
	ca("other")
	leaf := func(name, cn, ext string) {
		openssl(t, d, append(append([]string{"req"}, ec...), "-keyout", name+".key", "-out", name+".csr", "-subj", "/CN="+cn)...)
		if err := os.WriteFile(filepath.Join(d, name+".ext"), []byte(ext+"\n"), 0o600); err != nil {
			t.Fatal(err)
		}
		openssl(t, d, "x509", "-req", "-in", name+".csr", "-CA", "ca.crt", "-CAkey", "ca.key", "-CAcreateserial",
			"-out", name+".crt", "-days", "2", "-extfile", name+".ext")
	}
	// Go's TLS client ignores the CN: the server certificate names its hosts in subjectAltName.
	leaf("server", "localhost", "subjectAltName=DNS:localhost,IP:127.0.0.1")
	leaf("client", "wendle-cross-03", "extendedKeyUsage=clientAuth")
	p := func(n string) string { return filepath.Join(d, n) }
	return pki{dir: d, ca: p("ca.crt"), serverCert: p("server.crt"), serverKey: p("server.key"),
		clientCert: p("client.crt"), clientKey: p("client.key"), otherCA: p("other.crt"), pass: p("password")}
}

// TestTLSWithPassword: TLS with a test CA, a client certificate, username and a password from a
// file; records arrive. A wrong password and an untrusted certificate give one clear error each,
// the publisher keeps retrying with backoff, and no credential reaches the logs or the status.
func TestTLSWithPassword(t *testing.T) {
	k := makePKI(t)
	const user, secret = "wendle-cross-03", "kestrel-bridge-4471"
	const wrong = "wrong-horse-9923"
	m := startMosquitto(t, brokerOpts{User: user, Pass: secret, CA: k.ca, Cert: k.serverCert, Key: k.serverKey,
		ExtraConfigLines: []string{"require_certificate true"}})
	if err := os.WriteFile(k.pass, []byte(secret+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	url := m.url("ssl")

	t.Run("delivers", func(t *testing.T) {
		col := newCollector(t, url, "wendlecross/#", func(o *mqtt.ClientOptions) {
			cfg := Config{TLS: TLSConfig{CAFile: k.ca, CertFile: k.clientCert, KeyFile: k.clientKey}}
			tc, err := cfg.tlsConfig()
			if err != nil {
				t.Fatal(err)
			}
			o.SetTLSConfig(tc).SetUsername(user).SetPassword(secret)
		})
		store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
		defer store.Close()
		var logs testrig.SyncBuffer
		p, err := New(Config{Brokers: []string{url}, TopicPrefix: "wendlecross", Username: user, PasswordFile: k.pass,
			TLS: TLSConfig{CAFile: k.ca, CertFile: k.clientCert, KeyFile: k.clientKey}}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
		if err != nil {
			t.Fatal(err)
		}
		runPublisher(t, p)
		waitConnected(t, p)
		for i := range 20 {
			mustAppend(t, store, second(i, false))
		}
		store.Flush()
		p.Notify()
		col.waitFor(20*time.Second, "20 seconds over TLS", func(msgs []received) bool {
			c, _ := countSeqs(t, msgs)
			return c.complete("second", 20)
		})
		noSecret(t, &logs, p, secret)
	})

	t.Run("insecure is warned about", func(t *testing.T) {
		store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
		defer store.Close()
		var logs testrig.SyncBuffer
		p, err := New(Config{Brokers: []string{url}, Username: user, PasswordFile: k.pass,
			TLS: TLSConfig{InsecureSkipVerify: true, CertFile: k.clientCert, KeyFile: k.clientKey}}, store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
		if err != nil {
			t.Fatal(err)
		}
		stop := runPublisher(t, p)
		waitConnected(t, p)
		stop()
		if !strings.Contains(logs.String(), "level=WARN") || !strings.Contains(logs.String(), "insecure_skip_verify is set") {
			t.Errorf("no warning about insecure_skip_verify at start:\n%s", logs.String())
		}
		noSecret(t, &logs, p, secret)
	})

	cases := []struct {
		name, want string
		cfg        Config
	}{
		{"wrong password", "refused the username or password", Config{Username: user, Password: wrong,
			TLS: TLSConfig{CAFile: k.ca, CertFile: k.clientCert, KeyFile: k.clientKey}}},
		{"untrusted certificate", "set publish.tls.ca_file", Config{Username: user, PasswordEnv: "LEQNODE_TEST_MQTT_PASSWORD",
			TLS: TLSConfig{CAFile: k.otherCA, CertFile: k.clientCert, KeyFile: k.clientKey}}},
	}
	t.Setenv("LEQNODE_TEST_MQTT_PASSWORD", secret)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			store := openStore(t, filepath.Join(t.TempDir(), "node.db"))
			defer store.Close()
			var logs testrig.SyncBuffer
			cfg := c.cfg
			cfg.Brokers, cfg.TopicPrefix, cfg.ReconnectMaxDelay = []string{url}, "wendlecross", Duration(time.Second)
			p, err := New(cfg, store, Identity{NodeID: "wendle-cross-03"}, newLogger(&logs))
			if err != nil {
				t.Fatal(err)
			}
			stop := runPublisher(t, p)
			deadline := time.Now().Add(15 * time.Second)
			for p.Status().Attempts < 3 && time.Now().Before(deadline) {
				time.Sleep(20 * time.Millisecond)
			}
			stop()
			st := p.Status()
			t.Logf("last error after %d attempts: %s", st.Attempts, st.LastError)
			if st.Attempts < 3 || st.Connected {
				t.Fatalf("status %+v: want at least 3 failed attempts (it keeps retrying)", st)
			}
			if !strings.Contains(st.LastError, c.want) || !strings.Contains(st.LastError, "127.0.0.1") {
				t.Errorf("last error %q: want it to name the broker and say %q", st.LastError, c.want)
			}
			if strings.Count(logs.String(), c.want) < 3 {
				t.Errorf("log: want the clear error at every attempt:\n%s", logs.String())
			}
			noSecret(t, &logs, p, secret, wrong)
		})
	}
}

// noSecret checks that no password reached the log or the status.
func noSecret(t *testing.T, logs *testrig.SyncBuffer, p *Publisher, secrets ...string) {
	t.Helper()
	st := fmt.Sprintf("%+v", p.Status())
	for _, s := range secrets {
		if strings.Contains(logs.String(), s) {
			t.Errorf("a password appears in the log")
		}
		if strings.Contains(st, s) {
			t.Errorf("a password appears in the status")
		}
	}
}
