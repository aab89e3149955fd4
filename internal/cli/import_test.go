package cli

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// The sample register of an invented office (Tallis County), in the
// layout of docs/import.md: every kind of row.
var importSample = filepath.Join("..", "..", "testdata", "import", "tallis")

var importFileNames = []string{"marks.csv", "conditions.csv", "heights.csv"}

// importDB is an empty register with the datums the sample names.
func importDB(t *testing.T) *pgtest.DB {
	t.Helper()
	db := pgtest.New(t)
	mustBin(t, db, ExitOK, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustBin(t, db, ExitOK, "datum", "add", "TCLD", "--name", "Tallis County local datum (invented)")
	return db
}

// sameFiles fails the test unless every file of the layout in dir is byte
// for byte the one in want.
func sameFiles(t *testing.T, want, dir string) {
	t.Helper()
	for _, n := range importFileNames {
		w, err := os.ReadFile(filepath.Join(want, n))
		if err != nil {
			t.Fatal(err)
		}
		g, err := os.ReadFile(filepath.Join(dir, n))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(w, g) {
			t.Errorf("%s differs from %s:\n--- want\n%s\n--- got\n%s", filepath.Join(dir, n), filepath.Join(want, n), w, g)
		}
	}
}

// TestImportExportRoundTrip imports the sample, exports it and compares
// file for file; imports the export into a second empty register and
// exports that; refuses the same import twice, naming the first; and the
// audit and the evidence verify. trace reaches the import of an imported
// height, with the SHA-256 of its files as computed here.
func TestImportExportRoundTrip(t *testing.T) {
	t.Parallel()
	db := importDB(t)

	before := registertest.Counts(t, db.Pool)
	_, out := mustBin(t, db, ExitOK, "import", importSample, "--check")
	if !strings.Contains(out, "5 marks, 5 condition reports, 9 height versions would be imported") {
		t.Errorf("import --check: %s", out)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)

	_, out = mustBin(t, db, ExitOK, "import", importSample, "--by", "importer")
	if !strings.Contains(out, "5 marks (4 with a description, 1 retired), 5 aliases, 5 condition reports, 9 height versions") {
		t.Errorf("import: %s", out)
	}
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"mark": 5, "mark_version": 4, "mark_alias": 5, "mark_retirement": 1,
		"mark_condition": 5, "height": 9, "import_event": 1, "register_commit": 1})

	first := filepath.Join(t.TempDir(), "first")
	mustBin(t, db, ExitOK, "export", "--out", first)
	sameFiles(t, importSample, first)

	// The same files again: refused, naming the earlier import.
	refusedBin(t, db, []string{"marks.csv: this file was imported already, by import", "heights.csv: this file was imported already",
		"marks.csv line 2 field designation: mark TC-0101 is in the register already"}, "import", importSample)

	mustBin(t, db, ExitOK, "audit", "verify")

	out, _ = mustBin(t, db, ExitOK, "trace", "TC-0101", "--datum", "NAVD88", "-o", "json")
	if !json.Valid([]byte(out)) {
		t.Fatalf("trace -o json: not JSON:\n%s", out)
	}
	if !strings.Contains(out, `"import_id"`) {
		t.Fatalf("trace -o json names no import: %s", out)
	}
	heights, err := os.ReadFile(filepath.Join(importSample, "heights.csv"))
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(heights)
	if !strings.Contains(out, hex.EncodeToString(sum[:])) {
		t.Errorf("trace names not the SHA-256 %x of heights.csv: %s", sum, out)
	}

	// Export → import into an empty register → export: the same files.
	db2 := importDB(t)
	mustBin(t, db2, ExitOK, "import", first)
	second := filepath.Join(t.TempDir(), "second")
	mustBin(t, db2, ExitOK, "export", "--out", second)
	sameFiles(t, importSample, second)
	mustBin(t, db2, ExitOK, "audit", "verify")
}

// TestImportSpreadsheetHabits: a byte-order mark, CRLF line ends and
// trailing empty columns are read as the plain files.
func TestImportSpreadsheetHabits(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	dir := t.TempDir()
	for _, n := range importFileNames {
		b, err := os.ReadFile(filepath.Join(importSample, n))
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSuffix(string(b), "\n"), "\n")
		for i := range lines {
			lines[i] += ",,"
		}
		if err := os.WriteFile(filepath.Join(dir, n), []byte("\ufeff"+strings.Join(lines, "\r\n")+"\r\n,,,\r\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	mustBin(t, db, ExitOK, "import", dir)
	out := filepath.Join(t.TempDir(), "out")
	mustBin(t, db, ExitOK, "export", "--out", out)
	sameFiles(t, importSample, out)
}

// importEdit copies the sample to a new folder, replacing in file name
// the text old by new (once, which must be there).
func importEdit(t *testing.T, edits ...[3]string) string {
	t.Helper()
	dir := t.TempDir()
	for _, n := range importFileNames {
		b, err := os.ReadFile(filepath.Join(importSample, n))
		if err != nil {
			t.Fatal(err)
		}
		s := string(b)
		for _, e := range edits {
			if e[0] != n {
				continue
			}
			if !strings.Contains(s, e[1]) {
				t.Fatalf("%s holds no %q", n, e[1])
			}
			s = strings.Replace(s, e[1], e[2], 1)
		}
		if err := os.WriteFile(filepath.Join(dir, n), []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

// TestImportBadRowsRefused: each kind of bad row is refused with its
// file, line and field, and nothing is written, by import and by import
// --check alike.
func TestImportBadRowsRefused(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	for _, c := range []struct {
		name string
		edit [3]string
		want string
	}{
		{"spreadsheet date", [3]string{"conditions.csv", "TC-0101,1994-06-01,good", "TC-0101,6/1/1994,good"},
			`conditions.csv line 2 field observed_on: "6/1/1994" is a spreadsheet's date, whose day and month cannot be told apart: write it YYYY-MM-DD`},
		{"spreadsheet serial date", [3]string{"heights.csv", "second-I,1994-06-01,Tallis County bench book 1994 p. 12", "second-I,34486,Tallis County bench book 1994 p. 12"},
			`heights.csv line 2 field in_force_from: "34486" looks like a spreadsheet's serial day number: write the date YYYY-MM-DD`},
		{"bare ft", [3]string{"heights.csv", "5794.12,intl-ft", "5794.12,ft"},
			`heights.csv line 6 field unit: "ft" is ambiguous`},
		{"bare ft header", [3]string{"heights.csv", "kind,value,unit", "kind,value_ft,unit"},
			`heights.csv line 1 field value_ft: "ft" is ambiguous`},
		{"unknown unit", [3]string{"heights.csv", "1771.05,m,2", "1771.05,yd,2"},
			`heights.csv line 8 field unit: unknown unit "yd"`},
		{"value", [3]string{"heights.csv", "1771.05,m,2", "1771.O5,m,2"},
			`heights.csv line 8 field value:`},
		{"more decimals than published", [3]string{"heights.csv", "1771.05,m,2", "1771.051,m,2"},
			`heights.csv line 8 field decimals: value 1771.051 has 3 decimals, more than the 2 published`},
		{"class", [3]string{"heights.csv", "third,2008-10-02", "fifth,2008-10-02"},
			`heights.csv line 6 field class: unknown accuracy class "fifth"`},
		{"future in-force date", [3]string{"heights.csv", "2001-07-01", "2999-07-01"},
			`heights.csv line 8 field in_force_from: 2999-07-01T00:00:00Z is in the future`},
		{"no source", [3]string{"heights.csv", "Tallis County depot survey 2001", ""},
			`heights.csv line 8 field source: cite the publication`},
		{"unknown datum", [3]string{"heights.csv", "TC-0103,NAVD88", "TC-0103,NGVD29"},
			`heights.csv line 8 field datum: no datum NGVD29 in the register`},
		{"unknown mark", [3]string{"heights.csv", "TC-0103,NAVD88", "TC-0199,NAVD88"},
			`heights.csv line 8 field mark: no mark TC-0199 in the register or in the marks file`},
		{"condition", [3]string{"conditions.csv", "TC-0102,2008-10-02,good", "TC-0102,2008-10-02,fine"},
			`conditions.csv line 4 field condition: "fine" is not a condition`},
		{"designation", [3]string{"marks.csv", "TC-0103,,rod", "TC 0103,,rod"},
			`marks.csv line 4 field designation: "TC 0103" is not a designation`},
		{"designation twice", [3]string{"marks.csv", "TC-0103,,rod", "tc-0101,,rod"},
			`marks.csv line 4 field designation: tc-0101 is given also on line 2`},
		{"alias kind", [3]string{"marks.csv", "former:TALLIS 1", "old:TALLIS 1"},
			`marks.csv line 2 field aliases: "old:TALLIS 1": the kind of an alias is former, stamped or agency=NAME`},
		{"alias is a designation", [3]string{"marks.csv", "former:TALLIS 1", "former:TC-0103"},
			`marks.csv line 2 field aliases: alias TC-0103 is also the designation on line 4`},
		{"latitude", [3]string{"marks.csv", "39.4127,-104.8211", "94.4127,-104.8211"},
			`marks.csv line 2 field lat: 94.4127 is outside -90 to 90 degrees`},
		{"retired without a reason", [3]string{"marks.csv", "2015-03-01,the depot was rebuilt and the rod pulled,", "2015-03-01,,"},
			`marks.csv line 4 field retired_reason: say why the mark was retired`},
		{"replaced by no mark", [3]string{"marks.csv", "rod pulled,TC-0105", "rod pulled,TC-0109"},
			`marks.csv line 4 field replaced_by: no mark TC-0109 in the register or in the marks file`},
		{"latitude alone", [3]string{"marks.csv", "39.4127,-104.8211", "39.4127,"},
			`marks.csv line 2 field lat: give lat and lon together, or neither`},
		{"unknown column", [3]string{"conditions.csv", "note,by", "remark,by"},
			`conditions.csv line 1 field remark: unknown column "remark"`},
		{"required column", [3]string{"heights.csv", "mark,datum,kind,value,unit,decimals,class,in_force_from,source,reason,by", "mark,datum,kind,value,unit,decimals,class,source,reason,by"},
			`heights.csv line 1 field in_force_from: the header has no column in_force_from`},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := importEdit(t, c.edit)
			refusedBin(t, db, []string{c.want, "nothing written"}, "import", dir)
			refusedBin(t, db, []string{c.want}, "import", dir, "--check")
		})
	}
}

// TestImportCheckReportsEveryProblem: --check names every problem of
// every file at once, not the first.
func TestImportCheckReportsEveryProblem(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	dir := importEdit(t,
		[3]string{"marks.csv", "39.4127,-104.8211", "94.4127,-104.8211"},
		[3]string{"conditions.csv", "TC-0101,1994-06-01,good", "TC-0101,6/1/1994,good"},
		[3]string{"heights.csv", "5794.12,intl-ft", "5794.12,ft"},
		[3]string{"heights.csv", "TC-0103,NAVD88", "TC-0199,NAVD88"})
	refusedBin(t, db, []string{"4 problem(s)", "marks.csv line 2 field lat", "conditions.csv line 2 field observed_on",
		"heights.csv line 6 field unit", "heights.csv line 8 field mark"}, "import", dir, "--check")
}
