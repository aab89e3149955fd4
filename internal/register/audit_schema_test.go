package register_test

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"cairn/internal/auditcache"
	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// The audit keeps the schema of the database it migrated afresh in its
// cache, and the next audit (of another process: here, after this one's
// memory is emptied) compares with what was kept instead of migrating one
// again, and still finds a trigger disabled behind the register's back.
// What it compares with is the cache's: an entry added to the kept copy
// is reported missing from the register. Not parallel: it empties the
// package's memory of fresh schemas.
func TestAuditSchemaCache(t *testing.T) {
	b := registertest.Setup(t)
	cache := auditcache.Dir{Path: t.TempDir()}
	b.Reg.UseSchemaCache(cache)
	register.ForgetFreshSchemas()
	first, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || first.Count() != 0 || first.SchemaFrom != register.SchemaFromScratch || first.SchemaObjects == 0 {
		t.Fatalf("first audit: %v, from %q, %d objects, %+v", err, first.SchemaFrom, first.SchemaObjects, first.Findings)
	}
	key, err := register.SchemaKey(b.Ctx, b.DB.Pool)
	if err != nil {
		t.Fatal(err)
	}
	kept, ok := cache.Load(key)
	if !ok || len(kept) != first.SchemaObjects {
		t.Fatalf("kept %v: %d entries, want the %d objects compared", ok, len(kept), first.SchemaObjects)
	}

	if _, err := b.DB.Pool.Exec(b.Ctx, "ALTER TABLE height DISABLE TRIGGER height_append_only"); err != nil {
		t.Fatal(err)
	}
	// A login made a member of a register's role meanwhile (as other tests
	// on the same server make theirs) changes no schema, nor the key.
	login := fmt.Sprintf("cairn_t_key_%d", time.Now().UnixNano())
	if _, err := b.DB.Pool.Exec(b.Ctx, "CREATE ROLE "+login+" LOGIN IN ROLE cairn_reader"); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.DB.Pool.Exec(context.Background(), "DROP ROLE IF EXISTS "+login) })
	register.ForgetFreshSchemas()
	second, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || second.SchemaFrom != register.SchemaFromCache || len(second.Findings) != 1 ||
		!strings.Contains(second.Findings[0].What, "the trigger is disabled") || second.Findings[0].Where != "trigger height_append_only on public.height" {
		t.Fatalf("second audit: %v, from %q, %+v; want the disabled trigger, from the cache", err, second.SchemaFrom, second.Findings)
	}

	doctored := append(kept[:len(kept):len(kept)], store.SchemaEntry{Kind: "function", Key: "function public.cairn_only_in_the_cache()", Def: "language sql"})
	if err := cache.Store(key, doctored); err != nil {
		t.Fatal(err)
	}
	register.ForgetFreshSchemas()
	third, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || third.SchemaFrom != register.SchemaFromCache || len(third.Findings) != 2 ||
		!strings.Contains(third.Findings[0].Where+third.Findings[1].Where, "cairn_only_in_the_cache") {
		t.Fatalf("third audit: %v, from %q, %+v; want the kept copy's extra function reported missing", err, third.SchemaFrom, third.Findings)
	}

	// A refresh migrates a scratch database again and replaces the kept copy.
	b.Reg.UseSchemaCache(auditcache.Dir{Path: cache.Path, Refresh: true})
	register.ForgetFreshSchemas()
	fourth, err := b.Reg.AuditVerify(b.Ctx)
	if err != nil || fourth.SchemaFrom != register.SchemaFromScratch || len(fourth.Findings) != 1 {
		t.Fatalf("refreshed audit: %v, from %q, %+v", err, fourth.SchemaFrom, fourth.Findings)
	}
	if again, _ := cache.Load(key); len(again) != len(kept) {
		t.Errorf("after the refresh the cache keeps %d entries, want %d", len(again), len(kept))
	}
}

// The incremental audit divided among worker transactions (4, a worker
// for every 7 mark ids) reads only the chains with a version written
// after the statement, each whole, and finds in one of them a version
// written before the statement and edited behind the register's back;
// the edit of a chain nothing touched since is the whole audit's to find.
// Not parallel: it sets the package's split.
func TestAuditVerifySinceInParts(t *testing.T) {
	b := registertest.Setup(t)
	b.Datum(t, registertest.DatumOpts{})
	var names []string
	for i := range 30 {
		names = append(names, fmt.Sprintf("TC-%04d", 600+i))
	}
	b.Marks(t, names...)
	for _, n := range names {
		b.Height(t, registertest.HeightOpts{Designation: n, Value: "10.000"})
	}
	stmt, _, err := b.Reg.MakeStatement(b.Ctx, "test", nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, n := range names[20:] {
		b.Height(t, registertest.HeightOpts{Designation: n, Value: "10.004"})
	}
	if _, err := b.DB.Pool.Exec(b.Ctx, `BEGIN; SET LOCAL session_replication_role = replica;
		UPDATE height SET reason = 'edited' WHERE mark_id IN (SELECT id FROM mark WHERE designation IN ('TC-0625', 'TC-0605')) AND version = 1; COMMIT`); err != nil {
		t.Fatal(err)
	}
	xid, err := b.Reg.StatementXid(b.Ctx, stmt)
	if err != nil {
		t.Fatal(err)
	}
	defer register.SetAuditSplit(4, 7)()
	rep, err := b.Reg.AuditChainsSince(b.Ctx, &xid)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Chains != 10 || rep.Versions != 20 || len(rep.Breaks) != 1 || rep.Breaks[0].Designation != "TC-0625" ||
		!strings.Contains(rep.Breaks[0].Problem, "hash does not match") {
		t.Fatalf("since, in parts: %d chains, %d versions, breaks %+v; want 10, 20 and the edit of TC-0625", rep.Chains, rep.Versions, rep.Breaks)
	}
	whole, err := b.Reg.AuditChainsSince(b.Ctx, nil)
	if err != nil || whole.Versions != 40 || len(whole.Breaks) != 2 {
		t.Fatalf("whole, in parts: %v, %d versions, breaks %+v; want 40 and both edits", err, whole.Versions, whole.Breaks)
	}
}
