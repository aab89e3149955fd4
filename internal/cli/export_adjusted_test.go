package cli

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/pgtest"
)

// TestExportSaysAdjustedHeightsAreNotReimported: heights published from
// the register's own adjustment are exported, and export says on stderr
// how many, and that an import refuses them (an adjustment is reproduced
// from its runs, not copied); the import of that export does refuse them.
func TestExportSaysAdjustedHeightsAreNotReimported(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	book, err := os.ReadFile(workedCircuit)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "worked.csv")
	if err := os.WriteFile(path, book, 0o644); err != nil {
		t.Fatal(err)
	}
	mustRun(t, db.URL, "datum", "add", "TCLD", "--name", "Tallis County local datum (invented)")
	for i := 1; i <= 6; i++ {
		mustRun(t, db.URL, "mark", "add", fmt.Sprintf("BM%d", i))
	}
	mustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "BM1", "728.730", "--unit", "m", "--datum", "TCLD",
		"--source", "Outside control sheet 1 (invented citation)", "--reason", "held control")
	mustRun(t, db.URL, "run", "record", path)
	var runID int64
	if err := db.Pool.QueryRow(context.Background(), "SELECT max(id) FROM run").Scan(&runID); err != nil {
		t.Fatal(err)
	}
	var rep adjustmentJSON
	if err := json.Unmarshal([]byte(mustRun(t, db.URL, "adjust", fmt.Sprint(runID), "--hold", "BM1", "--datum", "TCLD", "-o", "json")), &rep); err != nil {
		t.Fatal(err)
	}
	mustRun(t, db.URL, "publish", fmt.Sprint(*rep.AdjustmentID), "--reason", "reviewed", "--yes")
	var adjusted int64
	if err := db.Pool.QueryRow(context.Background(), "SELECT count(*) FROM height WHERE source_kind = 'adjustment'").Scan(&adjusted); err != nil {
		t.Fatal(err)
	}
	if adjusted == 0 {
		t.Fatal("the adjustment published no height")
	}

	out := filepath.Join(t.TempDir(), "exp")
	_, errOut := mustBin(t, db, ExitOK, "export", "--out", out)
	want := fmt.Sprintf("warning: heights.csv holds %d height version(s) of kind adjustment", adjusted)
	if !strings.Contains(errOut, want) || !strings.Contains(errOut, "cairn import refuses them") {
		t.Errorf("export's stderr does not say %q:\n%s", want, errOut)
	}
	heights, err := os.ReadFile(filepath.Join(out, "heights.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if n := int64(strings.Count(string(heights), ",adjustment,")); n != adjusted {
		t.Errorf("heights.csv holds %d versions of kind adjustment, the register %d", n, adjusted)
	}

	db2 := pgtest.New(t)
	mustRun(t, db2.URL, "datum", "add", "TCLD", "--name", "Tallis County local datum (invented)")
	refusedBin(t, db2, []string{"heights.csv line 3 field kind: a height from one of this register's adjustments is not imported: import it as authority, citing the publication"},
		"import", out, "--check")

	// A register without such heights: no warning.
	db3 := importDB(t)
	mustBin(t, db3, ExitOK, "import", importSample)
	_, errOut = mustBin(t, db3, ExitOK, "export", "--out", filepath.Join(t.TempDir(), "exp"))
	if strings.Contains(errOut, "warning") {
		t.Errorf("export warns of no adjusted height: %s", errOut)
	}
}
