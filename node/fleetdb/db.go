// Package fleetdb is leqnode's central database on PostgreSQL: the records of every node of a
// fleet, which of their sequence numbers arrived, payloads held in quarantine, the resend
// requests sent for holes, and the views dashboards read.
//
// # Model
//
// Every record is identified by (store id, kind, sequence number), as the node's store numbers
// it; writes are idempotent on that key (INSERT ... ON CONFLICT DO NOTHING), so at-least-once
// delivery and resends never duplicate a row. A batch of rows is written in one transaction:
// COPY into a temporary staging table, then an insert that skips duplicates, then the arrival
// bookkeeping. Nothing is acknowledged upstream before that transaction commits.
//
// Arrivals are kept per stream (store id, kind) as merged ranges of sequence numbers with the
// times of their first and last records, not one row per record: the gaps between ranges are
// the holes (view missing_records), and their times bound the resend command that fills them.
// A range of numbers that a node skipped on purpose (a restart) can be recorded as skipped,
// and then no longer counts as missing.
//
// The large tables (seconds by day; minutes, events, health by month) are partitioned by the
// record's time; partitions are created ahead and on demand. The schema is versioned: the SQL
// files in migrations/ are applied in order, each once, by Migrate.
//
// Quantity columns carry the names of `leqnode analyze` (LAeq, LAFmax, LAF90 ...), written
// without quotes, which PostgreSQL folds to lower case.
package fleetdb

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net/url"
	"regexp"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Options say how to reach the database.
type Options struct {
	// URL is a libpq connection URL or key=value string, without a password:
	// postgres://leqnode@db.wendle-cross.invalid/leqnode?sslmode=verify-full.
	URL string
	// Password, when not empty, replaces any password the URL or the environment give. It is
	// never logged.
	Password string
	// MaxConns bounds the pool (default 4). More connections write more batches at once but
	// each holds server memory; one collector needs few.
	MaxConns int32
	// Logger receives notes on partitions and migrations (default: discard).
	Logger *slog.Logger
}

// DB is an open central database. It is safe for concurrent use.
type DB struct {
	pool *pgxpool.Pool
	log  *slog.Logger
	mu   sync.Mutex
	// parts holds the partitions known to exist, by name.
	parts map[string]bool
}

// Open connects to the database (it does not migrate; see Migrate).
func Open(ctx context.Context, o Options) (*DB, error) {
	cfg, err := pgxpool.ParseConfig(o.URL)
	if err != nil {
		return nil, fmt.Errorf("database url: %s: write it as postgres://USER@HOST:PORT/DB", redact(err))
	}
	if o.Password != "" {
		cfg.ConnConfig.Password = o.Password
	}
	cfg.MaxConns = 4
	if o.MaxConns > 0 {
		cfg.MaxConns = o.MaxConns
	}
	cfg.ConnConfig.RuntimeParams["application_name"] = "leqnode"
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("database %s: %s", Describe(o.URL), redact(err))
	}
	log := o.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	return &DB{pool: pool, log: log, parts: map[string]bool{}}, nil
}

// Close closes every connection.
func (db *DB) Close() { db.pool.Close() }

// Ping checks that the database answers.
func (db *DB) Ping(ctx context.Context) error { return db.pool.Ping(ctx) }

// Pool returns the connection pool, for queries of the caller's own.
func (db *DB) Pool() *pgxpool.Pool { return db.pool }

// Describe returns user@host:port/database of a connection URL, for logs: never a password.
func Describe(s string) string {
	cfg, err := pgconn.ParseConfig(s)
	if err != nil {
		return "(unparsable database url)"
	}
	return fmt.Sprintf("%s@%s:%d/%s", cfg.User, cfg.Host, cfg.Port, cfg.Database)
}

// HasPassword reports whether a connection URL or key=value string carries a password itself.
func HasPassword(s string) bool {
	if u, err := url.Parse(s); err == nil && (u.Scheme == "postgres" || u.Scheme == "postgresql") {
		_, inUser := u.User.Password()
		return inUser || u.Query().Has("password")
	}
	return passwordKey.MatchString(s)
}

var passwordKey = regexp.MustCompile(`(^|\s)password\s*=`)

// redact keeps pgx's error text but hides anything that looks like a password in it.
func redact(err error) string {
	var pe *pgconn.ParseConfigError
	if errors.As(err, &pe) {
		return "cannot parse the connection string"
	}
	return err.Error()
}

// Transient reports whether err is worth retrying with the same data (the server or the
// network failed) rather than a fault of the data itself (a PostgreSQL data exception or
// integrity violation: SQLSTATE classes 22 and 23).
func Transient(err error) bool {
	var pe *pgconn.PgError
	if errors.As(err, &pe) {
		c := pe.Code[:2]
		return c != "22" && c != "23"
	}
	return !errors.Is(err, context.Canceled)
}

// partitionName returns the partition of table t that holds time at, and its bounds.
func partitionName(t *table, at time.Time) (name string, from, to time.Time) {
	at = at.UTC()
	if t.partition == "day" {
		from = time.Date(at.Year(), at.Month(), at.Day(), 0, 0, 0, 0, time.UTC)
		return fmt.Sprintf("%s_%s", t.name, from.Format("20060102")), from, from.AddDate(0, 0, 1)
	}
	from = time.Date(at.Year(), at.Month(), 1, 0, 0, 0, 0, time.UTC)
	return fmt.Sprintf("%s_%s", t.name, from.Format("200601")), from, from.AddDate(0, 1, 0)
}

// ensurePartitions creates the partitions that rows need (each once per process).
func (db *DB) ensurePartitions(ctx context.Context, rows []Row) error {
	need := map[string]string{}
	db.mu.Lock()
	for i := range rows {
		t := tableOf(rows[i].Kind)
		if t.partition == "" {
			continue
		}
		name, from, to := partitionName(t, rows[i].Time)
		if db.parts[name] || need[name] != "" {
			continue
		}
		need[name] = fmt.Sprintf("CREATE TABLE IF NOT EXISTS leqnode.%s PARTITION OF leqnode.%s FOR VALUES FROM ('%s') TO ('%s')",
			name, t.name, from.Format(time.RFC3339), to.Format(time.RFC3339))
	}
	db.mu.Unlock()
	for name, sql := range need {
		if _, err := db.pool.Exec(ctx, sql); err != nil {
			var pe *pgconn.PgError
			// Two collectors creating the same partition at once: the loser sees a duplicate.
			if !errors.As(err, &pe) || (pe.Code != "42P07" && pe.Code != "23505") {
				return fmt.Errorf("creating partition %s: %w", name, err)
			}
		}
		db.mu.Lock()
		db.parts[name] = true
		db.mu.Unlock()
	}
	return nil
}

// CreatePartitionsAhead creates the partitions of every partitioned table from now to ahead.
func (db *DB) CreatePartitionsAhead(ctx context.Context, now time.Time, ahead time.Duration) error {
	var rows []Row
	for i := range tables {
		if tables[i].partition == "" {
			continue
		}
		for at := now; !at.After(now.Add(ahead)); at = at.Add(24 * time.Hour) {
			rows = append(rows, Row{Kind: tables[i].kind, Time: at})
		}
	}
	return db.ensurePartitions(ctx, rows)
}

// txFunc runs f in a transaction and commits it.
func (db *DB) inTx(ctx context.Context, f func(pgx.Tx) error) error {
	tx, err := db.pool.Begin(ctx)
	if err != nil {
		return err
	}
	// A no-op after Commit; after a failure f's error is the one to report, and a connection
	// whose rollback failed is closed by pgx, which frees whatever the transaction held.
	defer func() { _ = tx.Rollback(ctx) }()
	if err := f(tx); err != nil {
		return err
	}
	return tx.Commit(ctx)
}
