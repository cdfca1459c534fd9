// Package pgtest gives tests a private PostgreSQL schema on the server
// named by TPCSCAN_TEST_POSTGRES (which .ci/postgres.sh sets up), and skips
// them with a clear message when that variable is unset.
package pgtest

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"fmt"
	"net/url"
	"os"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
)

// EnvVar names the server tests use.
const EnvVar = "TPCSCAN_TEST_POSTGRES"

// DSN creates an empty schema for this test, drops it when the test ends,
// and returns a URL whose connections use only that schema. Tests that
// call it skip when EnvVar is unset.
func DSN(t testing.TB) string {
	t.Helper()
	base := os.Getenv(EnvVar)
	if base == "" {
		t.Skipf("%s is not set: no PostgreSQL server to test against (source .ci/postgres.sh to start one)", EnvVar)
	}
	var b [6]byte
	if _, err := rand.Read(b[:]); err != nil {
		t.Fatal(err)
	}
	schema := "t_" + hex.EncodeToString(b[:])
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	if err := exec(ctx, base, "CREATE SCHEMA "+schema); err != nil {
		t.Fatalf("create test schema: %v", err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		if err := exec(ctx, base, "DROP SCHEMA "+schema+" CASCADE"); err != nil {
			t.Errorf("drop test schema: %v", err)
		}
	})
	dsn, err := WithSchema(base, schema)
	if err != nil {
		t.Fatal(err)
	}
	return dsn
}

// WithSchema returns dsn with its search_path set to schema.
func WithSchema(dsn, schema string) (string, error) {
	u, err := url.Parse(dsn)
	if err != nil {
		return "", fmt.Errorf("parse %s: %w", EnvVar, err)
	}
	q := u.Query()
	q.Set("search_path", schema)
	u.RawQuery = q.Encode()
	return u.String(), nil
}

// Exec runs one statement on its own connection.
func Exec(ctx context.Context, dsn, sql string, args ...any) error {
	return exec(ctx, dsn, sql, args...)
}

func exec(ctx context.Context, dsn, sql string, args ...any) error {
	conn, err := pgx.Connect(ctx, dsn)
	if err != nil {
		return err
	}
	defer conn.Close(ctx)
	_, err = conn.Exec(ctx, sql, args...)
	return err
}
