// Package backend opens a store by its DSN: a file path is an SQLite
// database; postgres:// and postgresql:// URLs are PostgreSQL servers.
package backend

import (
	"context"
	"fmt"
	"net/url"
	"strings"

	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/sqlite"
)

// Open opens the store that dsn names.
func Open(ctx context.Context, dsn string) (store.Store, error) {
	switch {
	case dsn == "":
		return nil, fmt.Errorf("open store: no database given (a file path, or a postgres:// URL)")
	case IsPostgres(dsn):
		return openPostgres(ctx, dsn)
	case strings.Contains(dsn, "://"):
		return nil, fmt.Errorf("open store %s: unknown kind of database URL (use a file path, or postgres://)", Redact(dsn))
	}
	s, err := sqlite.Open(ctx, dsn)
	if err != nil {
		return nil, err
	}
	return s, nil
}

// IsPostgres reports whether dsn names a PostgreSQL server.
func IsPostgres(dsn string) bool {
	return strings.HasPrefix(dsn, "postgres://") || strings.HasPrefix(dsn, "postgresql://")
}

// Redact hides a password in a URL DSN, for messages: the one after the
// user name and a password parameter in the query. Other DSNs (file
// paths) are returned as they are.
func Redact(dsn string) string {
	if !strings.Contains(dsn, "://") {
		return dsn
	}
	u, err := url.Parse(dsn)
	if err != nil {
		return "(unparsable URL)"
	}
	if _, has := u.User.Password(); has {
		u.User = url.UserPassword(u.User.Username(), "***")
	}
	if q := u.Query(); q.Has("password") {
		q.Set("password", "***")
		u.RawQuery = q.Encode()
	}
	return strings.ReplaceAll(u.String(), "%2A%2A%2A", "***")
}
