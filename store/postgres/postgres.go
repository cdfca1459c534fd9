// Package postgres is the PostgreSQL store: the backend a collaboration
// shares across servers and sites. It implements store.Store with a pgx
// connection pool; pgx prepares and caches every statement per connection.
//
// Concurrency: each method is one READ COMMITTED transaction. Handing out
// the next event locks one open slot with FOR UPDATE SKIP LOCKED, so any
// number of tpcscan servers can assign from one campaign without two of
// them taking the same slot; revisions are appended under a row lock on
// their pass, so no save is lost. Serialisation failures, deadlocks and
// errors raised before a statement reached the server are retried.
package postgres

import (
	"context"
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"math/rand/v2"
	"path"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"

	"github.com/tpcscan/tpcscan/store"
)

//go:embed migrations/*.sql
var migrationFS embed.FS

// Defaults for Open; a DSN may override the pool size with pool_max_conns.
const (
	defaultMaxConns = 16
	// opTimeout bounds one store call when the caller set no earlier deadline.
	opTimeout = 15 * time.Second
	// maxAttempts bounds retries of one transaction.
	maxAttempts = 8
	// migrateLock is the advisory lock key that serialises schema upgrades
	// across processes ("tpcscan" in ASCII, as an int64).
	migrateLock = 0x747063736361
)

// Store is a campaign database on a PostgreSQL server.
type Store struct {
	pool *pgxpool.Pool

	mu    sync.Mutex
	infos map[int64]info // campaign rows never change once made
}

var (
	_ store.Store  = (*Store)(nil)
	_ store.Dumper = (*Store)(nil)
	_ store.Loader = (*Store)(nil)
)

// Open connects to the server named by dsn (postgres://user@host/db?...),
// upgrades the schema if it is older than this tpcscan (which needs a role
// allowed to create tables; see the README), and returns the store. It
// returns store.ErrTooNew if a newer tpcscan wrote the schema.
func Open(ctx context.Context, dsn string) (*Store, error) {
	cfg, err := pgxpool.ParseConfig(dsn)
	if err != nil {
		return nil, fmt.Errorf("parse postgres URL: %w", err)
	}
	if !strings.Contains(dsn, "pool_max_conns") {
		cfg.MaxConns = defaultMaxConns
	}
	if _, ok := cfg.ConnConfig.RuntimeParams["application_name"]; !ok {
		cfg.ConnConfig.RuntimeParams["application_name"] = "tpcscan" // shows in pg_stat_activity
	}
	ctx, cancel := context.WithTimeout(ctx, opTimeout)
	defer cancel()
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("connect to postgres: %w", err)
	}
	s := &Store{pool: pool, infos: map[int64]info{}}
	if err := s.migrate(ctx); err != nil {
		pool.Close()
		return nil, err
	}
	return s, nil
}

// Close releases every connection.
func (s *Store) Close() error {
	s.pool.Close()
	return nil
}

// migration is one numbered schema step.
type migration struct {
	version int
	name    string
	sql     string
}

func migrations() ([]migration, error) {
	names, err := fs.Glob(migrationFS, "migrations/*.sql")
	if err != nil {
		return nil, err
	}
	var ms []migration
	for _, n := range names {
		base := path.Base(n)
		v, err := strconv.Atoi(strings.SplitN(base, "_", 2)[0])
		if err != nil {
			return nil, fmt.Errorf("migration %s: name must start with its number: %w", base, err)
		}
		b, err := migrationFS.ReadFile(n)
		if err != nil {
			return nil, err
		}
		ms = append(ms, migration{version: v, name: base, sql: string(b)})
	}
	sort.Slice(ms, func(i, j int) bool { return ms[i].version < ms[j].version })
	for i, m := range ms {
		if m.version != i+1 {
			return nil, fmt.Errorf("migration %s: expected number %d", m.name, i+1)
		}
	}
	return ms, nil
}

// migrate applies missing migrations in one transaction, under an advisory
// lock so that servers starting together upgrade once.
func (s *Store) migrate(ctx context.Context) error {
	ms, err := migrations()
	if err != nil {
		return err
	}
	err = s.tx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1)", int64(migrateLock)); err != nil {
			return err
		}
		var exists bool
		if err := tx.QueryRow(ctx, "SELECT to_regclass('schema_migrations') IS NOT NULL").Scan(&exists); err != nil {
			return err
		}
		current := 0
		if exists {
			if err := tx.QueryRow(ctx, "SELECT coalesce(max(version), 0) FROM schema_migrations").Scan(&current); err != nil {
				return err
			}
		} else if _, err := tx.Exec(ctx, `CREATE TABLE schema_migrations (
			version integer PRIMARY KEY, name text NOT NULL, applied timestamptz NOT NULL DEFAULT now())`); err != nil {
			return err
		}
		if current > len(ms) {
			return fmt.Errorf("schema version %d, this tpcscan knows %d: %w", current, len(ms), store.ErrTooNew)
		}
		for _, m := range ms[current:] {
			if _, err := tx.Exec(ctx, m.sql); err != nil {
				return fmt.Errorf("apply %s: %w", m.name, err)
			}
			if _, err := tx.Exec(ctx, "INSERT INTO schema_migrations (version, name) VALUES ($1, $2)", m.version, m.name); err != nil {
				return fmt.Errorf("record %s: %w", m.name, err)
			}
		}
		return nil
	})
	if pgCode(err) == codeNoPrivilege {
		return fmt.Errorf("the database's tpcscan tables are missing or older than this tpcscan (schema version %d), "+
			"and this role may not create or change tables: open it once with the owner role "+
			"(see the README's PostgreSQL section): %w", len(ms), err)
	}
	if err != nil {
		return fmt.Errorf("migrate postgres schema: %w", err)
	}
	return nil
}

// tx runs fn in a transaction and commits. It runs the whole transaction
// again, after a short jittered backoff, when it failed without
// committing for a reason that another try can cure: a serialisation
// failure or deadlock, or the server connection dying before COMMIT was
// sent (a restarted server, a killed backend, a dropped link). Errors from
// fn itself (not found, conflict) are returned as they are. A connection
// lost during COMMIT is not retried: the save may have landed.
func (s *Store) tx(ctx context.Context, fn func(pgx.Tx) error) error {
	ctx, cancel := context.WithTimeout(ctx, opTimeout)
	defer cancel()
	return s.retry(ctx, fn)
}

// retry is tx without its deadline, for bulk work bounded by the caller.
func (s *Store) retry(ctx context.Context, fn func(pgx.Tx) error) error {
	for attempt := 1; ; attempt++ {
		again, err := s.try(ctx, fn)
		if err == nil || !again || attempt == maxAttempts {
			return err
		}
		// 1, 2, 4 … ms plus jitter, so colliding servers do not collide again.
		d := time.Duration(1<<(attempt-1)) * time.Millisecond
		d += rand.N(d)
		t := time.NewTimer(d)
		select {
		case <-ctx.Done():
			t.Stop()
			return fmt.Errorf("%w (after %d attempts: %w)", ctx.Err(), attempt, err)
		case <-t.C:
		}
	}
}

// try runs one attempt of a transaction; again reports whether a failure
// left nothing committed and may be cured by running it again.
func (s *Store) try(ctx context.Context, fn func(pgx.Tx) error) (again bool, err error) {
	conn, err := s.pool.Acquire(ctx)
	if err != nil {
		return pgconn.SafeToRetry(err), err
	}
	defer conn.Release()
	tx, err := conn.Begin(ctx)
	if err != nil {
		return retryable(err) || conn.Conn().IsClosed(), err
	}
	if err := fn(tx); err != nil {
		tx.Rollback(ctx)
		// The transaction cannot have committed: retry if the conflict was
		// transient or the connection died under it.
		return retryable(err) || (conn.Conn().IsClosed() && ctx.Err() == nil), err
	}
	if err := tx.Commit(ctx); err != nil {
		return retryable(err), err
	}
	return false, nil
}

// retryable reports whether an error says the transaction was refused as
// a whole and may simply run again: a serialisation failure or deadlock,
// or a failure before anything reached the server.
func retryable(err error) bool {
	var pgErr *pgconn.PgError
	if errors.As(err, &pgErr) {
		switch pgErr.Code {
		case "40001", "40P01": // serialization_failure, deadlock_detected
			return true
		}
		return false
	}
	return pgconn.SafeToRetry(err)
}

// pgCode returns the SQLSTATE of err, or "".
func pgCode(err error) string {
	var pgErr *pgconn.PgError
	if errors.As(err, &pgErr) {
		return pgErr.Code
	}
	return ""
}

// Codes mapped to store sentinels.
const (
	codeUnique     = "23505"
	codeForeignKey = "23503"
	// codeNoPrivilege is insufficient_privilege.
	codeNoPrivilege = "42501"
)
