package backend

import (
	"context"
	"fmt"

	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/postgres"
)

// openPostgres opens a PostgreSQL store; messages never show a password.
func openPostgres(ctx context.Context, dsn string) (store.Store, error) {
	s, err := postgres.Open(ctx, dsn)
	if err != nil {
		return nil, fmt.Errorf("open store %s: %w", Redact(dsn), err)
	}
	return s, nil
}
