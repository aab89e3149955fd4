package cli

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/user"
	"path/filepath"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// Every command that writes stores who did it: --by, or the operating
// system's user when --by is not given.
func TestEveryWriteStoresBy(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	me, err := user.Current()
	if err != nil {
		t.Fatal(err)
	}
	book, err := os.ReadFile(workedCircuit)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "worked.csv")
	if err := os.WriteFile(path, book, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, who := range []string{"A. Moreau", ""} {
		by := func(args ...string) []string {
			if who == "" {
				return args
			}
			return append(args, "--by", who)
		}
		want := who
		if want == "" {
			want = me.Username
		}
		sfx := map[bool]string{true: "A", false: "B"}[who != ""]
		mustRun(t, db.URL, by("datum", "add", "D"+sfx, "--name", "Datum "+sfx)...)
		if who != "" {
			for i := 1; i <= 6; i++ {
				mustRun(t, db.URL, by("mark", "add", fmt.Sprintf("BM%d", i))...)
			}
		} else {
			// The marks are there: a new one, and the book again as a new file.
			mustRun(t, db.URL, "mark", "add", "TC-0499")
			if err := os.WriteFile(path, registertest.SideShot(t, append([]byte("# copy 2\n"), book...), "copy 2"), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		mustRun(t, db.URL, by("mark", "condition", "BM2", "good")...)
		mustRun(t, db.URL, by("height", "set", "--in-force-from", inForceNow(), "BM1", "728.730", "--unit", "m", "--datum", "D"+sfx,
			"--source", "Outside control sheet 1 (invented citation)", "--reason", "held control")...)
		mustRun(t, db.URL, by("run", "record", path)...)
		var runID int64
		if err := db.Pool.QueryRow(context.Background(), "SELECT max(id) FROM run").Scan(&runID); err != nil {
			t.Fatal(err)
		}
		adjust := func() string {
			args := []string{"adjust", fmt.Sprint(runID), "--hold", "BM1", "--datum", "D" + sfx, "-o", "json"}
			if who != "" {
				args = append(args, "--by", who)
			}
			var rep adjustmentJSON
			if err := json.Unmarshal([]byte(mustRun(t, db.URL, args...)), &rep); err != nil {
				t.Fatal(err)
			}
			return fmt.Sprint(*rep.AdjustmentID)
		}
		discarded, published := adjust(), adjust()
		mustRun(t, db.URL, by("discard", discarded, "--reason", "a second try follows", "--yes")...)
		mustRun(t, db.URL, by("publish", published, "--reason", "reviewed", "--yes")...)

		for _, q := range []string{
			"SELECT created_by FROM datum WHERE code = 'D" + sfx + "'",
			"SELECT created_by FROM mark ORDER BY id DESC LIMIT 1",
			"SELECT recorded_by FROM mark_condition ORDER BY id DESC LIMIT 1",
			"SELECT recorded_by FROM run ORDER BY id DESC LIMIT 1",
			"SELECT created_by FROM adjustment ORDER BY id DESC LIMIT 1",
			"SELECT recorded_by FROM adjustment_event WHERE status = 'discarded' ORDER BY id DESC LIMIT 1",
			"SELECT recorded_by FROM adjustment_event WHERE status = 'published' ORDER BY id DESC LIMIT 1",
			"SELECT recorded_by FROM height WHERE source_kind = 'authority' ORDER BY id DESC LIMIT 1",
			"SELECT recorded_by FROM height WHERE source_kind = 'adjustment' ORDER BY id DESC LIMIT 1",
		} {
			var got string
			if err := db.Pool.QueryRow(context.Background(), q).Scan(&got); err != nil {
				t.Fatalf("%s: %v", q, err)
			}
			if got != want {
				t.Errorf("%s: %q, want %q", q, got, want)
			}
		}
	}
}
