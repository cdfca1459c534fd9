package postgres

import (
	"testing"

	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/storetest"
)

// TestContract runs the backend-independent contract suite (the same one
// the SQLite store passes) against PostgreSQL, each case on a fresh schema.
func TestContract(t *testing.T) {
	t.Parallel()
	storetest.Run(t, func(t *testing.T) store.Store {
		s, _ := open(t)
		return s
	})
}
