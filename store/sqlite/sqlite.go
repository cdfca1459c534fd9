// Package sqlite is the embedded store: one SQLite file, written through
// the cgo-free modernc.org/sqlite driver, shared safely by several
// tpcscan processes at once.
//
// Durability: the file runs in WAL mode with synchronous=FULL. A commit
// returns only after the write-ahead log is on disk, so a label the screen
// shows as saved survives a crash of the process (SIGKILL) and also a power
// cut or kernel panic. (synchronous=NORMAL would survive process death too
// but may lose the last commits on power loss.) Saves still take well
// under the 5 ms budget; see BenchmarkSaveRevision.
package sqlite

import (
	"bytes"
	"context"
	"database/sql"
	"embed"
	"errors"
	"fmt"
	"io"
	"net/url"
	"os"
	"path"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"modernc.org/sqlite"
	sqlite3 "modernc.org/sqlite/lib"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

//go:embed migrations/*.sql
var migrationFS embed.FS

// applicationID marks a tpcscan database in the SQLite header ("TPCS").
const applicationID = 0x54504353

// Store is a campaign database in one SQLite file.
type Store struct {
	path string
	w    *sql.DB // writes: one connection, BEGIN IMMEDIATE
	r    *sql.DB // reads: a small pool of snapshot transactions

	mu      sync.Mutex
	schemas map[int64]campaignInfo // campaigns never change once made
}

var _ store.Store = (*Store)(nil)

// campaignInfo is what SaveRevision and NextPass need of a campaign.
type campaignInfo struct {
	schema   scan.Schema
	mode     string
	perEvent int
	adaptive bool
	seed     int64
	nEvents  int
	roster   []string
}

// Open opens or creates the database at path and brings its tables up to
// date. A file that is not SQLite, an SQLite file of another program, or a
// database from a newer tpcscan (store.ErrTooNew) is refused untouched.
func Open(ctx context.Context, path string) (*Store, error) {
	if path == "" {
		return nil, errors.New("open store: no database file given")
	}
	if err := checkHeader(path); err != nil {
		return nil, err
	}
	have, err := inspect(ctx, path)
	if err != nil {
		return nil, err
	}
	w, err := sql.Open("sqlite", dsn(path, "immediate"))
	if err != nil {
		return nil, fmt.Errorf("open %s: %w", path, err)
	}
	w.SetMaxOpenConns(1) // writers queue in Go, not in SQLite's busy loop
	r, err := sql.Open("sqlite", dsn(path, "deferred"))
	if err != nil {
		w.Close()
		return nil, fmt.Errorf("open %s: %w", path, err)
	}
	r.SetMaxOpenConns(4)
	s := &Store{path: path, w: w, r: r, schemas: map[int64]campaignInfo{}}
	if err := s.migrate(ctx, have); err != nil {
		s.Close()
		return nil, err
	}
	return s, nil
}

// dsn builds the driver's connection string. The pragmas run on every new
// pooled connection.
func dsn(path, txlock string) string {
	q := url.Values{}
	q.Add("_pragma", "busy_timeout(10000)")
	q.Add("_pragma", "foreign_keys(1)")
	q.Add("_pragma", "journal_mode(WAL)")
	q.Add("_pragma", "synchronous(FULL)")
	q.Set("_txlock", txlock)
	return "file:" + (&url.URL{Path: path}).EscapedPath() + "?" + q.Encode()
}

// checkHeader refuses a non-empty file that does not start with the
// SQLite magic string, before the driver touches it.
func checkHeader(path string) error {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("open store: %w", err)
	}
	defer f.Close()
	var head [16]byte
	n, err := io.ReadFull(f, head[:])
	if n == 0 {
		return nil // empty file: a new database
	}
	if err != nil || !bytes.Equal(head[:], []byte("SQLite format 3\x00")) {
		return fmt.Errorf("open %s: not a tpcscan database: the file is not SQLite (damaged, or another kind of file); nothing was changed", path)
	}
	return nil
}

// inspect looks at an existing file through a read-only connection with no
// pragmas, so that a file of another program is refused before anything
// (such as switching it to WAL) could change it. It returns the file's
// schema version, 0 for a new file.
func inspect(ctx context.Context, path string) (int, error) {
	if fi, err := os.Stat(path); err != nil || fi.Size() == 0 {
		return 0, nil
	}
	db, err := sql.Open("sqlite", "file:"+(&url.URL{Path: path}).EscapedPath()+"?mode=ro")
	if err != nil {
		return 0, fmt.Errorf("open %s: %w", path, err)
	}
	defer db.Close()
	ex := &Store{path: path}
	tx, err := db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return 0, ex.explain(fmt.Errorf("open %s: %w", path, err))
	}
	defer tx.Rollback()
	if err := checkOwner(ctx, tx, path); err != nil {
		return 0, ex.explain(err)
	}
	var have int
	err = tx.QueryRowContext(ctx, `SELECT coalesce(max(version), 0) FROM schema_migrations`).Scan(&have)
	if err != nil && !strings.Contains(err.Error(), "no such table") {
		return 0, ex.explain(fmt.Errorf("open %s: read schema version: %w", path, err))
	}
	return have, nil
}

// Close releases the database.
func (s *Store) Close() error {
	return errors.Join(s.r.Close(), s.w.Close())
}

// Path returns the database file.
func (s *Store) Path() string { return s.path }

// migrate applies the embedded migrations that the file lacks, all in one
// transaction, after checking that the file is ours and not newer.
func (s *Store) migrate(ctx context.Context, seen int) error {
	names, err := migrationFS.ReadDir("migrations")
	if err != nil {
		return fmt.Errorf("read migrations: %w", err)
	}
	if seen == len(names) {
		return nil // up to date: open without writing
	}
	return s.tx(ctx, func(tx *sql.Tx) error {
		if err := checkOwner(ctx, tx, s.path); err != nil {
			return err
		}
		if _, err := tx.ExecContext(ctx, `CREATE TABLE IF NOT EXISTS schema_migrations (version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied TEXT NOT NULL)`); err != nil {
			return fmt.Errorf("create schema_migrations: %w", err)
		}
		var have int
		if err := tx.QueryRowContext(ctx, `SELECT coalesce(max(version), 0) FROM schema_migrations`).Scan(&have); err != nil {
			return fmt.Errorf("read schema version: %w", err)
		}
		if have > len(names) {
			return fmt.Errorf("open %s: database is at schema version %d, this tpcscan knows up to %d; use a newer tpcscan: %w", s.path, have, len(names), store.ErrTooNew)
		}
		for i, e := range names {
			v := i + 1
			if want := fmt.Sprintf("%03d_", v); !strings.HasPrefix(e.Name(), want) {
				return fmt.Errorf("migration %s: expected a name starting %s", e.Name(), want)
			}
			if v <= have {
				continue
			}
			body, err := migrationFS.ReadFile(path.Join("migrations", e.Name()))
			if err != nil {
				return fmt.Errorf("read migration %s: %w", e.Name(), err)
			}
			if _, err := tx.ExecContext(ctx, string(body)); err != nil {
				return fmt.Errorf("apply migration %s: %w", e.Name(), err)
			}
			if _, err := tx.ExecContext(ctx, `INSERT INTO schema_migrations (version, name, applied) VALUES (?, ?, ?)`, v, e.Name(), stamp(time.Now())); err != nil {
				return fmt.Errorf("record migration %s: %w", e.Name(), err)
			}
		}
		_, err := tx.ExecContext(ctx, `PRAGMA application_id = `+strconv.Itoa(applicationID))
		return err
	})
}

// checkOwner refuses an SQLite file that another program made: one with a
// different application ID, or with tables and no schema_migrations.
func checkOwner(ctx context.Context, tx *sql.Tx, path string) error {
	var app int64
	if err := tx.QueryRowContext(ctx, `PRAGMA application_id`).Scan(&app); err != nil {
		return fmt.Errorf("open %s: %w", path, err)
	}
	if app != 0 && app != applicationID {
		return fmt.Errorf("open %s: not a tpcscan database: it belongs to another program (application id %#x); nothing was changed", path, app)
	}
	rows, err := tx.QueryContext(ctx, `SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'`)
	if err != nil {
		return fmt.Errorf("open %s: %w", path, err)
	}
	defer rows.Close()
	var tables []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			return err
		}
		tables = append(tables, n)
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("open %s: %w", path, err)
	}
	if len(tables) > 0 && !slices.Contains(tables, "schema_migrations") {
		sort.Strings(tables)
		if len(tables) > 5 {
			tables = append(tables[:5], "…")
		}
		return fmt.Errorf("open %s: not a tpcscan database: an SQLite file of another program (tables %s); nothing was changed", path, strings.Join(tables, ", "))
	}
	return nil
}

// tx runs fn in one write transaction (BEGIN IMMEDIATE, so two processes
// never both read-then-write), commits, and rolls back on any error. A busy
// database is retried here, so "database is locked" never reaches a user
// unless the lock outlasts several busy timeouts.
func (s *Store) tx(ctx context.Context, fn func(*sql.Tx) error) error {
	return s.retry(ctx, func() error { return runTx(ctx, s.w, nil, fn) })
}

// view runs fn in a read-only snapshot transaction.
func (s *Store) view(ctx context.Context, fn func(*sql.Tx) error) error {
	return s.retry(ctx, func() error { return runTx(ctx, s.r, &sql.TxOptions{ReadOnly: true}, fn) })
}

func runTx(ctx context.Context, db *sql.DB, opt *sql.TxOptions, fn func(*sql.Tx) error) (err error) {
	tx, err := db.BeginTx(ctx, opt)
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			tx.Rollback()
		}
	}()
	if err = fn(tx); err != nil {
		return err
	}
	return tx.Commit()
}

func (s *Store) retry(ctx context.Context, f func() error) error {
	const attempts = 5
	for i := 0; ; i++ {
		err := f()
		if !isBusy(err) || i == attempts-1 {
			return s.explain(err)
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-time.After(time.Duration(i+1) * 20 * time.Millisecond):
		}
	}
}

func isBusy(err error) bool {
	var e *sqlite.Error
	if errors.As(err, &e) {
		c := e.Code() & 0xff
		return c == sqlite3.SQLITE_BUSY || c == sqlite3.SQLITE_LOCKED
	}
	return false
}

// explain turns driver errors that a user could meet into sentences.
func (s *Store) explain(err error) error {
	var e *sqlite.Error
	if err == nil || !errors.As(err, &e) {
		return err
	}
	switch e.Code() & 0xff {
	case sqlite3.SQLITE_CORRUPT, sqlite3.SQLITE_NOTADB:
		return fmt.Errorf("database %s is damaged (%v); restore it from a backup, keeping the -wal file beside it, which holds the latest saves", s.path, err)
	case sqlite3.SQLITE_BUSY, sqlite3.SQLITE_LOCKED:
		return fmt.Errorf("database %s stayed busy (another tpcscan is holding it): %w", s.path, err)
	case sqlite3.SQLITE_READONLY, sqlite3.SQLITE_CANTOPEN, sqlite3.SQLITE_PERM:
		return fmt.Errorf("database %s cannot be written or opened: check the file and folder permissions: %w", s.path, err)
	case sqlite3.SQLITE_FULL:
		return fmt.Errorf("database %s: disk full; nothing was saved by this action: %w", s.path, err)
	}
	return err
}

func isUnique(err error) bool {
	var e *sqlite.Error
	return errors.As(err, &e) && (e.Code() == sqlite3.SQLITE_CONSTRAINT_UNIQUE || e.Code() == sqlite3.SQLITE_CONSTRAINT_PRIMARYKEY)
}

func isForeignKey(err error) bool {
	var e *sqlite.Error
	return errors.As(err, &e) && e.Code() == sqlite3.SQLITE_CONSTRAINT_FOREIGNKEY
}

// stamp is the stored form of a time: UTC, microseconds, RFC 3339.
func stamp(t time.Time) string {
	return t.UTC().Truncate(time.Microsecond).Format(time.RFC3339Nano)
}

func parseStamp(s string) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, fmt.Errorf("bad time %q in database: %w", s, err)
	}
	return t, nil
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}
