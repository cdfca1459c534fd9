package sqlite

import (
	"context"
	"path/filepath"
	"testing"

	"github.com/tpcscan/tpcscan/store"
	"github.com/tpcscan/tpcscan/store/storetest"
)

func openTemp(t testing.TB) *Store {
	t.Helper()
	s, err := Open(context.Background(), filepath.Join(t.TempDir(), "scan.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func TestContract(t *testing.T) {
	storetest.Run(t, func(t *testing.T) store.Store { return openTemp(t) })
}
