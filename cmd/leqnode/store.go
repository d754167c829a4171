package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"time"

	"github.com/leqnode/leqnode/buffer"
	"github.com/leqnode/leqnode/node/control"
	"github.com/leqnode/leqnode/node/lib/config"
	"github.com/leqnode/leqnode/node/lib/query"
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

// read answers a reading command against the store at path (from target): it opens the file
// read-only, with the 1 s lock timeout, and calls query.Do. When the daemon holds the file, it
// sends the request to the daemon's control socket instead, where the same query.Do answers it
// against the daemon's open store; the output is copied to standard output as it comes, and a
// failure comes back as an error value (errors.Is query.ErrBadRequest for bad input).
func (f storeFlags) read(ctx context.Context, std stdio, path string, req query.Request) (err error) {
	st, err := buffer.OpenReadOnly(path, time.Second)
	switch {
	case err == nil:
		defer func() {
			if cerr := st.Close(); cerr != nil && err == nil {
				err = fmt.Errorf("closing the store %s: %w", path, cerr)
			}
		}()
		return query.Do(ctx, st, req, std.out)
	case errors.Is(err, buffer.ErrNoStore):
		return badInput("%v", err)
	case !errors.Is(err, buffer.ErrLocked):
		return err
	}
	sock := f.socket()
	c := control.NewClient(sock)
	if !c.Available() {
		return fmt.Errorf("%w (no daemon answers on the control socket %s: give --config with the node's [control] socket, or set LEQNODE_CONTROL)", err, sock)
	}
	return c.Read(ctx, req, std.out)
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
