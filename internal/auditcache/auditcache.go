// Package auditcache keeps, between runs of cairn, what the audit learned
// of a database freshly migrated by this binary: the fingerprint of its
// schema, by the key that names everything it depends on
// (register.SchemaKey). Making one costs seconds (a scratch database
// created, migrated and dropped); the fingerprint is the same every time
// for the same key.
//
// The files are the user's own: a directory of mode 0700 and files of
// mode 0600, written whole to a new name and renamed into place. A file
// another user could have written (not owned by this user, or writable by
// group or others), or whose key is not the one asked for, is not used.
package auditcache

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"syscall"

	"cairn/internal/store"
)

// Dir is a cache in one directory.
type Dir struct {
	Path string
	// Refresh makes Load find nothing, so that the audit makes a scratch
	// database again and Store replaces what was kept.
	Refresh bool
}

// Default is the cache in CAIRN_CACHE_DIR, or else in the user's cache
// directory (os.UserCacheDir, e.g. ~/.cache/cairn/audit); ok is false when
// there is neither.
func Default() (Dir, bool) {
	if d := os.Getenv("CAIRN_CACHE_DIR"); d != "" {
		return Dir{Path: filepath.Join(d, "audit")}, true
	}
	d, err := os.UserCacheDir()
	if err != nil {
		return Dir{}, false
	}
	return Dir{Path: filepath.Join(d, "cairn", "audit")}, true
}

// file is the layout of one cached fingerprint.
type file struct {
	Key     string              `json:"key"`
	Entries []store.SchemaEntry `json:"entries"`
}

func (d Dir) name(key string) string {
	sum := sha256.Sum256([]byte(key))
	return filepath.Join(d.Path, "schema-"+hex.EncodeToString(sum[:16])+".json")
}

// Load returns the fingerprint kept for key; false when there is none, or
// the file is not the user's alone or names another key.
func (d Dir) Load(key string) ([]store.SchemaEntry, bool) {
	if d.Refresh {
		return nil, false
	}
	name := d.name(key)
	for _, p := range []string{d.Path, name} {
		if ownOnly(p) != nil {
			return nil, false
		}
	}
	data, err := os.ReadFile(name)
	if err != nil {
		return nil, false
	}
	var f file
	if err := json.Unmarshal(data, &f); err != nil || f.Key != key || len(f.Entries) == 0 {
		return nil, false
	}
	return f.Entries, true
}

// Store keeps entries as the fingerprint of key.
func (d Dir) Store(key string, entries []store.SchemaEntry) error {
	if err := os.MkdirAll(d.Path, 0o700); err != nil {
		return fmt.Errorf("make the audit's cache %s: %w", d.Path, err)
	}
	if err := ownOnly(d.Path); err != nil {
		return err
	}
	data, err := json.Marshal(file{Key: key, Entries: entries})
	if err != nil {
		return err
	}
	tmp, err := os.CreateTemp(d.Path, ".schema-*.partial")
	if err != nil {
		return fmt.Errorf("write the audit's cache: %w", err)
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return fmt.Errorf("write the audit's cache: %w", err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write the audit's cache: %w", err)
	}
	if err := os.Rename(tmp.Name(), d.name(key)); err != nil {
		return fmt.Errorf("write the audit's cache: %w", err)
	}
	return nil
}

// ownOnly says why path may not be trusted: it is not this user's, or
// group or others may write it.
func ownOnly(path string) error {
	fi, err := os.Lstat(path)
	if err != nil {
		return err
	}
	if fi.Mode()&fs.ModeSymlink != 0 {
		return fmt.Errorf("%s is a symbolic link", path)
	}
	if fi.Mode().Perm()&0o022 != 0 {
		return fmt.Errorf("%s may be written by others (mode %v)", path, fi.Mode().Perm())
	}
	st, ok := fi.Sys().(*syscall.Stat_t)
	if !ok {
		return errors.New("no owner known")
	}
	if int(st.Uid) != os.Getuid() {
		return fmt.Errorf("%s belongs to user %d", path, st.Uid)
	}
	return nil
}
