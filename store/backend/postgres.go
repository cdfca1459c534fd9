package backend

import (
	"context"
	"fmt"

	"github.com/tpcscan/tpcscan/store"
)

// openPostgres opens a PostgreSQL store. (Wired by the PostgreSQL backend.)
func openPostgres(ctx context.Context, dsn string) (store.Store, error) {
	return nil, fmt.Errorf("open store %s: this tpcscan was built without the PostgreSQL backend", Redact(dsn))
}
