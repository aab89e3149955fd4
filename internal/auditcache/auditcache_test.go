package auditcache

import (
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"cairn/internal/store"
)

var entries = []store.SchemaEntry{
	{Kind: "function", Key: "function public.f()", Def: "language sql; body SELECT 1", SecurityDefiner: true},
	{Kind: "column", Key: "column public.t.c", Def: "text; not null true; default none"},
}

// What is stored under a key is loaded under that key only; a file that
// is not the user's alone (writable by the group, here) or a refresh
// finds nothing. Common practice: the permission checks of ssh's
// StrictModes, which refuses a file others may write.
func TestStoreLoad(t *testing.T) {
	d := Dir{Path: filepath.Join(t.TempDir(), "audit")}
	if _, ok := d.Load("k1"); ok {
		t.Fatal("an empty cache loaded something")
	}
	if err := d.Store("k1", entries); err != nil {
		t.Fatal(err)
	}
	got, ok := d.Load("k1")
	if !ok || !reflect.DeepEqual(got, entries) {
		t.Fatalf("loaded %v, %+v; want %+v", ok, got, entries)
	}
	if _, ok := d.Load("k2"); ok {
		t.Error("another key loaded k1's entries")
	}
	if fi, err := os.Stat(d.Path); err != nil || fi.Mode().Perm() != 0o700 {
		t.Errorf("cache directory: %v, %v; want mode 0700", fi.Mode().Perm(), err)
	}
	if fi, err := os.Stat(d.name("k1")); err != nil || fi.Mode().Perm() != 0o600 {
		t.Errorf("cache file: %v, %v; want mode 0600", fi.Mode().Perm(), err)
	}
	if _, ok := (Dir{Path: d.Path, Refresh: true}).Load("k1"); ok {
		t.Error("a refresh loaded the kept entries")
	}
	// A file whose key inside is not its name's (copied over another's).
	other := Dir{Path: d.Path}
	if err := other.Store("k2", entries[:1]); err != nil {
		t.Fatal(err)
	}
	data, _ := os.ReadFile(d.name("k2"))
	if err := os.WriteFile(d.name("k1"), data, 0o600); err != nil {
		t.Fatal(err)
	}
	if _, ok := d.Load("k1"); ok {
		t.Error("a file naming key k2 loaded for k1")
	}
	if err := d.Store("k1", entries); err != nil {
		t.Fatal(err)
	}
	if err := os.Chmod(d.name("k1"), 0o620); err != nil {
		t.Fatal(err)
	}
	if _, ok := d.Load("k1"); ok {
		t.Error("a group-writable file loaded")
	}
	if err := os.Chmod(d.name("k1"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.Chmod(d.Path, 0o770); err != nil {
		t.Fatal(err)
	}
	if _, ok := d.Load("k1"); ok {
		t.Error("a file in a group-writable directory loaded")
	}
}
