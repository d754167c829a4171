package fleetdb

import (
	"context"
	"embed"
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"

	"github.com/jackc/pgx/v5"
)

//go:embed migrations/*.sql
var migrations embed.FS

// migrationLock is the advisory lock key that serialises migrations of several collectors.
const migrationLock = 0x6c65716e6f6465 // "leqnode"

type migration struct {
	version int
	name    string
	sql     string
}

func loadMigrations() ([]migration, error) {
	ents, err := migrations.ReadDir("migrations")
	if err != nil {
		return nil, err
	}
	var out []migration
	for _, e := range ents {
		v, err := strconv.Atoi(strings.SplitN(e.Name(), "_", 2)[0])
		if err != nil {
			return nil, fmt.Errorf("migration %s: no version number in its name", e.Name())
		}
		b, err := migrations.ReadFile("migrations/" + e.Name())
		if err != nil {
			return nil, err
		}
		out = append(out, migration{v, e.Name(), string(b)})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].version < out[j].version })
	return out, nil
}

// SchemaVersion returns the version of the newest migration this release holds.
func SchemaVersion() int {
	ms, _ := loadMigrations()
	if len(ms) == 0 {
		return 0
	}
	return ms[len(ms)-1].version
}

// Migrate applies every migration the database lacks, each in its own transaction, under an
// advisory lock (several collectors may start at once). It returns the names applied. A
// database newer than this release is an error: run the newer release.
func (db *DB) Migrate(ctx context.Context) (_ []string, err error) {
	ms, err := loadMigrations()
	if err != nil {
		return nil, err
	}
	conn, err := db.pool.Acquire(ctx)
	if err != nil {
		return nil, err
	}
	defer conn.Release()
	if _, err := conn.Exec(ctx, "SELECT pg_advisory_lock($1)", int64(migrationLock)); err != nil {
		return nil, err
	}
	defer func() {
		bg := context.WithoutCancel(ctx)
		if _, uerr := conn.Exec(bg, "SELECT pg_advisory_unlock($1)", int64(migrationLock)); uerr != nil {
			// The lock lasts as long as the session: close it, so that the pool does not hand
			// out a session that still holds the lock and every other collector waits forever.
			_ = conn.Conn().Close(bg) // the unlock's error is the one to report
			err = errors.Join(err, fmt.Errorf("releasing the migration lock: %w", uerr))
		}
	}()
	if _, err := conn.Exec(ctx, `CREATE SCHEMA IF NOT EXISTS leqnode;
		CREATE TABLE IF NOT EXISTS leqnode.migrations (version integer PRIMARY KEY, name text NOT NULL,
		applied_at timestamptz NOT NULL DEFAULT now())`); err != nil {
		return nil, fmt.Errorf("migrations table: %w", err)
	}
	var have int
	if err := conn.QueryRow(ctx, "SELECT coalesce(max(version), 0) FROM leqnode.migrations").Scan(&have); err != nil {
		return nil, err
	}
	if latest := ms[len(ms)-1].version; have > latest {
		return nil, fmt.Errorf("the database has schema version %d, this release knows %d: run a newer leqnode", have, latest)
	}
	var applied []string
	for _, m := range ms {
		if m.version <= have {
			continue
		}
		err := pgx.BeginFunc(ctx, conn, func(tx pgx.Tx) error {
			if _, err := tx.Exec(ctx, m.sql); err != nil {
				return err
			}
			_, err := tx.Exec(ctx, "INSERT INTO leqnode.migrations (version, name) VALUES ($1, $2)", m.version, m.name)
			return err
		})
		if err != nil {
			return applied, fmt.Errorf("migration %s: %w", m.name, err)
		}
		db.log.Info("database migrated", "migration", m.name)
		applied = append(applied, m.name)
	}
	return applied, nil
}
