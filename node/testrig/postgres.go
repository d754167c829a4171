package testrig

import (
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// PostgresBin is where Debian 12's postgresql package puts the server programs.
const PostgresBin = "/usr/lib/postgresql/15/bin"

// PostgresOptions configure a test server.
type PostgresOptions struct {
	// Durable keeps fsync on (benchmarks that quote write rates); tests turn it off for speed.
	Durable bool
	// Settings are extra server settings, "name=value".
	Settings []string
}

// Postgres is a PostgreSQL server in a temporary directory on 127.0.0.1, run as the postgres
// system user when the test runs as root (the server refuses to run as root), with a
// superuser "leqtest" that needs no password on loopback.
type Postgres struct {
	t    testing.TB
	Dir  string
	Port int
	User string
	opts PostgresOptions
	as   []string // runuser prefix, or nil
}

// StartPostgres initialises a cluster and starts it; it is stopped and removed at the end of
// the test.
func StartPostgres(t testing.TB, o PostgresOptions) *Postgres {
	t.Helper()
	need(t, "postgresql", filepath.Join(PostgresBin, "initdb"), filepath.Join(PostgresBin, "pg_ctl"))
	dir, err := os.MkdirTemp("", "leqnode-pg-")
	if err != nil {
		t.Fatal(err)
	}
	p := &Postgres{t: t, Dir: dir, Port: FreePort(t), User: "leqtest", opts: o}
	t.Cleanup(func() {
		p.Stop()
		if err := os.RemoveAll(dir); err != nil {
			t.Logf("the PostgreSQL cluster is left in %s: %v", dir, err)
		}
	})
	if os.Geteuid() == 0 {
		u, err := user.Lookup("postgres")
		if err != nil {
			t.Fatalf("user postgres: %v: install the Debian package postgresql (make test-deps)", err)
		}
		uid, _ := strconv.Atoi(u.Uid)
		gid, _ := strconv.Atoi(u.Gid)
		if err := os.Chown(dir, uid, gid); err != nil {
			t.Fatal(err)
		}
		p.as = []string{"runuser", "-u", "postgres", "--"}
	}
	if out, err := p.run("initdb", "-D", filepath.Join(dir, "data"), "-A", "trust", "-U", p.User, "--no-sync", "-E", "UTF8"); err != nil {
		t.Fatalf("initdb: %v\n%s", err, out)
	}
	p.Start()
	return p
}

func (p *Postgres) run(prog string, args ...string) ([]byte, error) {
	argv := append(append(append([]string{}, p.as...), filepath.Join(PostgresBin, prog)), args...)
	cmd := exec.Command(argv[0], argv[1:]...)
	cmd.Dir = p.Dir
	return cmd.CombinedOutput()
}

// Start starts the server (again) and waits until it accepts connections.
func (p *Postgres) Start() {
	p.t.Helper()
	fsync := "off"
	if p.opts.Durable {
		fsync = "on"
	}
	o := []string{"-k", p.Dir, "-p", strconv.Itoa(p.Port), "-c", "listen_addresses=127.0.0.1", "-c", "fsync=" + fsync}
	for _, s := range p.opts.Settings {
		o = append(o, "-c", s)
	}
	if out, err := p.run("pg_ctl", "-D", filepath.Join(p.Dir, "data"), "-w", "-t", "60", "-l", filepath.Join(p.Dir, "log"), "-o", strings.Join(o, " "), "start"); err != nil {
		log, _ := os.ReadFile(filepath.Join(p.Dir, "log"))
		p.t.Fatalf("pg_ctl start: %v\n%s\n%s", err, out, log)
	}
	deadline := time.Now().Add(30 * time.Second)
	for {
		c, err := (&net.Dialer{Timeout: 200 * time.Millisecond}).DialContext(context.Background(), "tcp", fmt.Sprintf("127.0.0.1:%d", p.Port))
		if err == nil {
			_ = c.Close() // a probe that sent nothing: it has done its job
			return
		}
		if time.Now().After(deadline) {
			p.t.Fatalf("postgres did not start: %v", err)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// Stop stops the server (fast shutdown: open sessions are ended); stopping a stopped server
// does nothing.
func (p *Postgres) Stop() {
	if _, err := os.Stat(filepath.Join(p.Dir, "data", "postmaster.pid")); err != nil {
		return
	}
	if out, err := p.run("pg_ctl", "-D", filepath.Join(p.Dir, "data"), "-w", "-m", "fast", "stop"); err != nil {
		p.t.Logf("pg_ctl stop: %v\n%s", err, out)
	}
}

// URL returns a connection URL for database db as the superuser.
func (p *Postgres) URL(db string) string {
	return fmt.Sprintf("postgres://%s@127.0.0.1:%d/%s?sslmode=disable", p.User, p.Port, db)
}

// Psql runs one SQL statement with psql as the superuser and returns its output.
func (p *Postgres) Psql(db, sql string) (string, error) {
	out, err := exec.Command(filepath.Join(PostgresBin, "psql"), "-X", "-q", "-A", "-t", "-v", "ON_ERROR_STOP=1", "-d", p.URL(db), "-c", sql).CombinedOutput()
	return string(out), err
}
