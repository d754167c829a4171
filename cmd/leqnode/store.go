package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/buffer/record"
	"github.com/leqnode/leqnode/node/config"
	"github.com/leqnode/leqnode/node/control"
	"github.com/leqnode/leqnode/node/strict"
)

// storeFlags are the flags every reading command uses to find its store.
type storeFlags struct {
	db, config *string
}

func addStoreFlags(fl interface {
	String(name, value, usage string) *string
}) storeFlags {
	return storeFlags{
		db:     fl.String("db", "", "the store file (bbolt)"),
		config: fl.String("config", "", "the node's configuration file; its store path and time zone are used"),
	}
}

// target returns the store path and configured zone that the flags name.
func (f storeFlags) target() (path, zone string, err error) {
	path = *f.db
	switch {
	case *f.db != "" && *f.config != "":
		return "", "", badInput("give either --db FILE or --config FILE, not both")
	case *f.config != "":
		cfg, err := config.Load(*f.config)
		if err != nil {
			return "", "", badInput("%v", err)
		}
		return cfg.Store.Path, cfg.Node.TimeZone, nil
	case path == "":
		return "", "", badInput("give the store with --db FILE or the node's configuration with --config FILE")
	}
	return path, "", nil
}

// zoneOf returns the zone for dates: the configured one, else that of the store's latest
// session record, else UTC.
func zoneOf(st *buffer.Store, zone string) *time.Location {
	if zone == "" {
		if r, err := st.Last(record.KindSession); err == nil && r != nil {
			zone = r.(*record.Session).TimeZone
		}
	}
	if zone != "" {
		if l, err := time.LoadLocation(zone); err == nil {
			return l
		}
	}
	return time.UTC
}

// errDoneByDaemon reports that the running daemon carried out the command through its control
// socket; the command has nothing left to do and succeeded.
var errDoneByDaemon = errors.New("carried out by the daemon")

// open opens the store named by --db or --config read-only for a reading command, with the 1 s
// lock timeout, and returns the zone for dates (zoneOf). It reads through: inside the daemon (a request
// on its control socket) it lends the daemon's own store; when the daemon holds the file, it
// sends the whole command to the daemon's control socket, copies the answer to standard output
// and returns errDoneByDaemon. done releases the store (it never closes the daemon's).
func (f storeFlags) open(ctx context.Context, std stdio) (st *buffer.Store, loc *time.Location, done func(), err error) {
	path, zone, err := f.target()
	if err != nil {
		return nil, nil, nil, err
	}
	if std.daemon != nil {
		return std.daemon, zoneOf(std.daemon, zone), func() {}, nil
	}
	st, err = buffer.OpenReadOnly(path, time.Second)
	switch {
	case err == nil:
		return st, zoneOf(st, zone), func() { st.Close() }, nil
	case errors.Is(err, buffer.ErrNoStore):
		return nil, nil, nil, badInput("%v", err)
	case !errors.Is(err, buffer.ErrLocked):
		return nil, nil, nil, err
	}
	sock := f.socket()
	c := control.NewClient(sock)
	if !c.Available() {
		return nil, nil, nil, fmt.Errorf("%w (no daemon answers on the control socket %s: give --config with the node's [control] socket, or set LEQNODE_CONTROL)", err, sock)
	}
	rerr := c.Exec(ctx, std.args, std.out)
	var ee *control.ExecError
	if errors.As(rerr, &ee) {
		if ee.Code == 2 {
			return nil, nil, nil, usageError{errors.New(ee.Message)}
		}
		return nil, nil, nil, errors.New(ee.Message)
	}
	if rerr != nil {
		return nil, nil, nil, rerr
	}
	return nil, nil, nil, errDoneByDaemon
}

// socket returns the control socket to try: LEQNODE_CONTROL, the configured one, or the
// default under systemd's runtime directory.
func (f storeFlags) socket() string {
	if p := os.Getenv("LEQNODE_CONTROL"); p != "" {
		return p
	}
	if *f.config != "" {
		if cfg, err := config.Load(*f.config); err == nil {
			if p := cfg.Control.Socket; p != "" && p != "none" {
				return p
			}
		}
	}
	return control.DefaultPath
}

// parseWhen parses the value of a time flag: RFC 3339, or a date YYYY-MM-DD meaning its
// midnight in loc.
func parseWhen(flag, v string, loc *time.Location) (time.Time, error) {
	if t, err := strict.ParseTime(v); err == nil {
		return t, nil
	}
	if t, err := time.ParseInLocation(time.DateOnly, v, loc); err == nil {
		return t, nil
	}
	return time.Time{}, badInput("--%s %q is not a time: write RFC 3339 (2026-05-04T07:00:00Z) or a date (2026-05-04, in zone %s)", flag, v, loc)
}
