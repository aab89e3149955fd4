package register

import (
	"context"
	"errors"
	"fmt"
	"sort"
	"strings"
	"sync"

	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/store"
)

// auditSchema compares the live schema with the one this binary's
// migrations make: it creates a scratch database (from template0), migrates
// it, reads both catalogs (store.SchemaFingerprint: functions with their
// bodies, settings and SECURITY DEFINER, triggers with whether they are
// enabled, constraints, columns, grants), drops the scratch database, and
// reports every object missing, added or different. A SECURITY DEFINER
// function the migrations do not make is reported by name. When the role
// may not create a database the schema is not compared, and
// SchemaUnchecked says so (the audit's output says it too): it is not a
// break, but it is not a pass either.
func (r *Register) auditSchema(ctx context.Context, rep *AuditReport) error {
	live, err := store.SchemaFingerprint(ctx, r.pool)
	if err != nil {
		return err
	}
	key, err := SchemaKey(ctx, r.pool)
	if err != nil {
		return err
	}
	freshMu.Lock()
	fresh, ok := freshSchemas[key]
	freshMu.Unlock()
	rep.SchemaFrom = SchemaFromScratch
	if !ok && r.schemaCache != nil {
		if fresh, ok = r.schemaCache.Load(key); ok {
			rep.SchemaFrom = SchemaFromCache
		}
	}
	if !ok {
		err = store.WithScratchRegister(ctx, r.pool, func(db store.DBTX) error {
			var err error
			fresh, err = store.SchemaFingerprint(ctx, db)
			return err
		})
		if err == nil {
			freshMu.Lock()
			freshSchemas[key] = fresh
			freshMu.Unlock()
			if r.schemaCache != nil {
				// A cache that cannot be written costs the next audit its
				// scratch database again, nothing more.
				_ = r.schemaCache.Store(key, fresh)
			}
		}
	}
	if errors.Is(err, store.ErrScratchRefused) {
		rep.SchemaFrom = ""
		rep.SchemaUnchecked = fmt.Sprintf("the schema was not compared with its migrations: %v (run the audit as a role that may create databases)", err)
		return nil
	}
	if err != nil {
		return fmt.Errorf("compare the schema with its migrations: %w", err)
	}
	since := "unknown: the catalog keeps no dates"
	if at, err := store.SchemaMigratedAt(ctx, r.pool); err == nil && !at.IsZero() {
		since += "; the schema was last migrated " + utc(at)
	}
	rep.SchemaObjects = len(live)
	rep.Findings = append(rep.Findings, schemaDiff(live, fresh, since)...)
	return nil
}

// Where the audit's reference schema came from (AuditReport.SchemaFrom).
const (
	// SchemaFromScratch: a scratch database this process migrated.
	SchemaFromScratch = "scratch"
	// SchemaFromCache: the fingerprint of one, made by an earlier run
	// for the same key (SchemaKey) and kept in the SchemaCache.
	SchemaFromCache = "cache"
)

// SchemaCache keeps, between processes, the fingerprint of a database
// freshly migrated by this binary, by SchemaKey.
type SchemaCache interface {
	Load(key string) ([]store.SchemaEntry, bool)
	Store(key string, entries []store.SchemaEntry) error
}

// UseSchemaCache makes the audit look in c for the fingerprint of a
// freshly migrated database before making a scratch one, and keep there
// the fingerprint of each one it makes.
func (r *Register) UseSchemaCache(c SchemaCache) { r.schemaCache = c }

// SchemaKey names everything a freshly migrated database's schema
// depends on: the server's address and version and the register's roles
// on it (store.SchemaServerKey), and the SHA-256 of this binary's
// migrations, names and texts (store.MigrationsDigest). Two scratch
// databases of one key have the same fingerprint.
func SchemaKey(ctx context.Context, pool *pgxpool.Pool) (string, error) {
	k, err := store.SchemaServerKey(ctx, pool)
	if err != nil {
		return "", err
	}
	d, err := store.MigrationsDigest()
	if err != nil {
		return "", err
	}
	return "cairn schema fingerprint 1; " + k + "; migrations " + d, nil
}

// freshSchemas keeps, for this process, the fingerprint of a database
// freshly migrated by this binary, by server and roles
// (store.SchemaServerKey): it depends on nothing else, and making one
// costs seconds.
var (
	freshMu      sync.Mutex
	freshSchemas = map[string][]store.SchemaEntry{}
)

// schemaDiff lists what differs between the live schema and the fresh
// one, by object.
func schemaDiff(live, fresh []store.SchemaEntry, since string) []Finding {
	want := map[string]store.SchemaEntry{}
	for _, e := range fresh {
		want[e.Key] = e
	}
	have := map[string]store.SchemaEntry{}
	var out []Finding
	add := func(where, format string, args ...any) {
		out = append(out, Finding{Kind: "schema", Where: where, Since: since, What: fmt.Sprintf(format, args...)})
	}
	for _, e := range live {
		have[e.Key] = e
		w, ok := want[e.Key]
		switch {
		case !ok && e.SecurityDefiner:
			add(e.Key, "unknown SECURITY DEFINER function: the migrations make no such function, and it runs with its owner's privileges, whoever calls it")
		case !ok:
			add(e.Key, "not made by the migrations (%s)", clip(e.Def))
		case e.Def != w.Def:
			add(e.Key, "%s", defDiff(e, w))
		}
	}
	for _, e := range fresh {
		if _, ok := have[e.Key]; !ok {
			add(e.Key, "missing: the migrations make it (%s)", clip(e.Def))
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].Where < out[j].Where })
	return out
}

// triggerStates are the values of pg_trigger.tgenabled.
var triggerStates = map[string]string{"O": "enabled", "D": "disabled", "R": "enabled only for replication", "A": "enabled always"}

// defDiff words how an object's definition differs from the migrations':
// the parts ("; "-separated) that differ, each side clipped.
func defDiff(live, fresh store.SchemaEntry) string {
	if live.Kind == "trigger" {
		l, f := lastPart(live.Def), lastPart(fresh.Def)
		if l != f && strings.TrimSuffix(live.Def, l) == strings.TrimSuffix(fresh.Def, f) {
			state := strings.TrimPrefix(l, "enabled ")
			return fmt.Sprintf("the trigger is %s (tgenabled %s), where the migrations leave it %s: the rule it enforces is off",
				triggerStates[state], state, triggerStates[strings.TrimPrefix(f, "enabled ")])
		}
	}
	lp, fp := strings.Split(live.Def, "; "), strings.Split(fresh.Def, "; ")
	var diffs []string
	for i := 0; i < max(len(lp), len(fp)); i++ {
		var l, f string
		if i < len(lp) {
			l = lp[i]
		}
		if i < len(fp) {
			f = fp[i]
		}
		if l != f {
			diffs = append(diffs, fmt.Sprintf("%q where the migrations have %q", clip(l), clip(f)))
		}
	}
	what := "definition"
	if live.Kind == "function" {
		what = "function"
	}
	return fmt.Sprintf("the %s differs from the migrations': %s", what, strings.Join(diffs, "; "))
}

func lastPart(s string) string {
	if i := strings.LastIndex(s, "; "); i >= 0 {
		return s[i+2:]
	}
	return s
}

// clip shortens a definition for a message, keeping its start.
func clip(s string) string {
	s = strings.Join(strings.Fields(s), " ")
	const most = 160
	if len([]rune(s)) > most {
		return string([]rune(s)[:most]) + "…"
	}
	return s
}
