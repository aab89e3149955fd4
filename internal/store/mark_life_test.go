package store_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"cairn/internal/pgtest"
	"cairn/internal/store"
)

// Two writers that each add one half of a collision, an alias and a mark
// of the same folded name, at once: the one that comes second waits for
// the first to commit and is refused (SQLSTATE CA018, store.ErrNameTaken),
// whichever half it writes (migrations/00018, mark_name_free).
func TestAliasAndDesignationRaceRefused(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	holder, err := store.MarkInsert(ctx, db.Pool, store.MarkInsertParams{Designation: "TC-0412", CreatedBy: "test"})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name        string
		aliasFirst  bool
		alias, mark string
	}{
		{"alias first", true, "OB-7", "ob-7"},
		{"mark first", false, "TC-0500", "tc-0500"},
	} {
		t.Run(c.name, func(t *testing.T) {
			first, err := db.Pool.Begin(ctx)
			if err != nil {
				t.Fatal(err)
			}
			defer first.Rollback(ctx)
			writeAlias := func(db store.DBTX) error {
				return store.AliasInsert(ctx, db, store.AliasInsertParams{MarkID: holder, Alias: c.alias, Kind: store.AliasFormer, By: "test"})
			}
			writeMark := func(db store.DBTX) error {
				_, err := store.MarkInsert(ctx, db, store.MarkInsertParams{Designation: c.mark, CreatedBy: "test"})
				return err
			}
			one, two := writeMark, writeAlias
			if c.aliasFirst {
				one, two = writeAlias, writeMark
			}
			if err := one(first); err != nil {
				t.Fatal(err)
			}
			done := make(chan error, 1)
			go func() {
				second, err := db.Pool.Begin(ctx)
				if err != nil {
					done <- err
					return
				}
				defer second.Rollback(ctx)
				if err := two(second); err != nil {
					done <- err
					return
				}
				done <- second.Commit(ctx)
			}()
			select {
			case err := <-done:
				t.Fatalf("the second writer did not wait for the first: %v", err)
			case <-time.After(300 * time.Millisecond):
			}
			if err := first.Commit(ctx); err != nil {
				t.Fatal(err)
			}
			if err := <-done; !errors.Is(err, store.ErrNameTaken) {
				t.Errorf("second writer: err = %v, want ErrNameTaken", err)
			}
		})
	}
}
