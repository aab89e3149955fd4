package cli

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// The sample register of an invented office (Tallis County), in the
// layout of docs/import.md, as an office would write it by hand (aliases
// and descriptions in marks.csv's columns); and its export, which holds
// the same register in the files export writes (docs/import.md).
var (
	importSample   = filepath.Join("..", "..", "testdata", "import", "tallis")
	importExported = filepath.Join("..", "..", "testdata", "import", "tallis-export")
	// A register with the whole life of its marks: descriptions edited,
	// aliases with notes, a mark disturbed and reset, photographs, a mark
	// retired and replaced.
	importLife = filepath.Join("..", "..", "testdata", "import", "tallis-life")
)

// layoutFiles lists the files of the import layout in dir, photographs
// as photos/NAME.
func layoutFiles(t *testing.T, dir string) []string {
	t.Helper()
	var names []string
	for _, n := range []string{"marks.csv", "descriptions.csv", "aliases.csv", "conditions.csv", "photos.csv", "heights.csv"} {
		if _, err := os.Stat(filepath.Join(dir, n)); err == nil {
			names = append(names, n)
		}
	}
	photos, _ := os.ReadDir(filepath.Join(dir, "photos"))
	for _, e := range photos {
		names = append(names, "photos/"+e.Name())
	}
	return names
}

// importDB is an empty register with the datums the sample names.
func importDB(t *testing.T) *pgtest.DB {
	t.Helper()
	db := pgtest.New(t)
	mustBin(t, db, ExitOK, "datum", "add", "NAVD88", "--name", "North American Vertical Datum of 1988")
	mustBin(t, db, ExitOK, "datum", "add", "TCLD", "--name", "Tallis County local datum (invented)")
	return db
}

// sameFiles fails the test unless dir holds the files of the layout that
// want holds, each byte for byte the same.
func sameFiles(t *testing.T, want, dir string) {
	t.Helper()
	if w, g := layoutFiles(t, want), layoutFiles(t, dir); !slices.Equal(w, g) {
		t.Errorf("%s holds %v, want %v (as %s)", dir, g, w, want)
	}
	for _, n := range layoutFiles(t, want) {
		w, err := os.ReadFile(filepath.Join(want, n))
		if err != nil {
			t.Fatal(err)
		}
		g, err := os.ReadFile(filepath.Join(dir, n))
		if err != nil {
			t.Error(err)
			continue
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
	if !strings.Contains(out, "5 marks (4 description versions, 1 retired), 5 aliases, 5 condition reports, 0 photographs, 9 height versions") {
		t.Errorf("import: %s", out)
	}
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"mark": 5, "mark_version": 4, "mark_alias": 5, "mark_retirement": 1,
		"mark_condition": 5, "height": 9, "import_event": 1, "register_commit": 1})

	first := filepath.Join(t.TempDir(), "first")
	mustBin(t, db, ExitOK, "export", "--out", first)
	sameFiles(t, importExported, first)

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
	sameFiles(t, importExported, second)
	mustBin(t, db2, ExitOK, "audit", "verify")
}

// registerRows is the register's content, table by table, each row as
// one text with its references by designation and version, without what
// a new register gives anew (ids, hashes, the times of recording, the
// transaction and role): what export and import must carry whole.
func registerRows(t *testing.T, db *pgtest.DB) map[string][]string {
	t.Helper()
	queries := map[string]string{
		"mark": `SELECT concat_ws('|', m.designation, m.mark_type, m.setting, m.stamping, m.to_reach, m.lat, m.lon, m.created_by) FROM mark m ORDER BY m.id`,
		"mark_version": `SELECT concat_ws('|', m.designation, v.version, v.mark_type, v.setting, v.stamping, v.directions, v.description,
			v.lat, v.lon, v.position_source, v.reason, v.recorded_by) FROM mark_version v JOIN mark m ON m.id = v.mark_id ORDER BY m.id, v.version`,
		"mark_alias": `SELECT concat_ws('|', m.designation, a.alias, a.kind, a.agency, a.note, a.recorded_by) FROM mark_alias a JOIN mark m ON m.id = a.mark_id ORDER BY a.id`,
		"mark_retirement": `SELECT concat_ws('|', m.designation, r.retired_on, r.reason, r.recorded_by, n.designation)
			FROM mark_retirement r JOIN mark m ON m.id = r.mark_id LEFT JOIN mark n ON n.id = r.replaced_by ORDER BY m.id`,
		"mark_condition": `SELECT concat_ws('|', m.designation, c.observed_on, c.condition, c.note, c.recorded_by) FROM mark_condition c JOIN mark m ON m.id = c.mark_id ORDER BY m.id, c.id`,
		"condition_photo": `SELECT concat_ws('|', m.designation, c.observed_on, c.condition, p.view, p.media_type, p.file_name, encode(p.sha256, 'hex'), octet_length(p.content), p.recorded_by)
			FROM condition_photo p JOIN mark_condition c ON c.id = p.condition_id JOIN mark m ON m.id = c.mark_id ORDER BY m.id, c.id, p.id`,
		"height": `SELECT concat_ws('|', m.designation, d.code, h.version, s.version, h.value, h.unit, h.decimals, h.class, h.source_kind, h.source,
			h.reason, h.recorded_by, h.in_force_from) FROM height h JOIN mark m ON m.id = h.mark_id JOIN datum d ON d.id = h.datum_id
			LEFT JOIN height s ON s.id = h.supersedes ORDER BY m.id, d.code, h.version`,
	}
	out := map[string][]string{}
	for table, q := range queries {
		rows, err := db.Pool.Query(context.Background(), q)
		if err != nil {
			t.Fatalf("%s: %v", table, err)
		}
		for rows.Next() {
			var s string
			if err := rows.Scan(&s); err != nil {
				t.Fatal(err)
			}
			out[table] = append(out[table], s)
		}
		rows.Close()
		if err := rows.Err(); err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// TestImportWholeLifeRoundTrip: a register whose marks have lived
// (descriptions edited, aliases with notes and their own recorders, a
// mark disturbed and reset with photographs of both visits, one picture
// kept with two reports, a mark retired by another person and replaced)
// is imported, exported, imported into an empty register and exported
// again: the two registers hold the same rows, table by table (ids,
// hashes and times of recording aside), and the two exports are byte for
// byte the same. Each photograph comes back byte for byte, named by its
// SHA-256 as crypto/sha256 (FIPS 180-4) computes it from the sample's
// file; the audit verifies both registers.
func TestImportWholeLifeRoundTrip(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	_, out := mustBin(t, db, ExitOK, "import", importLife, "--by", "importer")
	if !strings.Contains(out, "4 marks (5 description versions, 1 retired), 4 aliases, 5 condition reports, 3 photographs, 6 height versions") {
		t.Errorf("import: %s", out)
	}
	first := filepath.Join(t.TempDir(), "first")
	mustBin(t, db, ExitOK, "export", "--out", first)
	rows := registerRows(t, db)
	for table, n := range map[string]int{"mark": 4, "mark_version": 5, "mark_alias": 4, "mark_retirement": 1, "mark_condition": 5, "condition_photo": 3, "height": 6} {
		if len(rows[table]) != n {
			t.Errorf("%s: %d rows imported, want %d:\n%s", table, len(rows[table]), n, strings.Join(rows[table], "\n"))
		}
	}
	for _, n := range []string{"TC-0202-closeup.jpg", "TC-0202-setting.png"} {
		b, err := os.ReadFile(filepath.Join(importLife, "photos", n))
		if err != nil {
			t.Fatal(err)
		}
		sum := sha256.Sum256(b)
		got, err := os.ReadFile(filepath.Join(first, "photos", hex.EncodeToString(sum[:])+filepath.Ext(n)))
		if err != nil || !bytes.Equal(got, b) {
			t.Errorf("export of %s: not in photos/ under its SHA-256, byte for byte: %v", n, err)
		}
	}
	// A height of the office's books in force before the day the mark was
	// found reset is before the reset, though the import recorded both at
	// once; the height set after the reset is not.
	o1, o2 := mustBin(t, db, ExitOK, "height", "show", "TC-0202")
	out = o1 + o2
	if !strings.Contains(out, "TC-0202 on TCLD, version 1: in force from 1999-12-01") || !strings.Contains(out, "BEFORE RESET") {
		t.Errorf("height show TC-0202: the 1999 TCLD height is not flagged before the 2014 reset:\n%s", out)
	}
	if strings.Contains(out, "TC-0202 on NAVD88, version 2: in force") {
		t.Errorf("height show TC-0202: the height set after the reset is flagged before it:\n%s", out)
	}
	// The mark's history after the import: version 3 holds the RTK position.
	out, _ = mustBin(t, db, ExitOK, "mark", "show", "TC-0202", "--history")
	for _, w := range []string{"position observed with RTK", "railing added 2003", "OB-RAMP-1", "the trust's number on its ramp drawings", "last reset\t2014-08-05"} {
		if !strings.Contains(out, w) {
			t.Errorf("mark show TC-0202 --history lacks %q:\n%s", w, out)
		}
	}

	db2 := importDB(t)
	mustBin(t, db2, ExitOK, "import", first)
	second := filepath.Join(t.TempDir(), "second")
	mustBin(t, db2, ExitOK, "export", "--out", second)
	sameFiles(t, first, second)
	rows2 := registerRows(t, db2)
	for table, want := range rows {
		if !slices.Equal(rows2[table], want) {
			t.Errorf("%s after the round trip:\n%s\nwant\n%s", table, strings.Join(rows2[table], "\n"), strings.Join(want, "\n"))
		}
	}
	mustBin(t, db, ExitOK, "audit", "verify")
	mustBin(t, db2, ExitOK, "audit", "verify")
}

// TestImportSpreadsheetHabits: a byte-order mark, CRLF line ends and
// trailing empty columns are read as the plain files.
func TestImportSpreadsheetHabits(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	dir := t.TempDir()
	for _, n := range layoutFiles(t, importSample) {
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
	sameFiles(t, importExported, out)
}

// importEdit copies the sample to a new folder, replacing in file name
// the text old by new (once, which must be there).
func importEdit(t *testing.T, edits ...[3]string) string {
	t.Helper()
	return importEditFrom(t, importSample, edits...)
}

// importEditFrom is importEdit of the sample in src (photographs copied
// as they are).
func importEditFrom(t *testing.T, src string, edits ...[3]string) string {
	t.Helper()
	dir := t.TempDir()
	for _, n := range layoutFiles(t, src) {
		b, err := os.ReadFile(filepath.Join(src, n))
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
		if err := os.MkdirAll(filepath.Dir(filepath.Join(dir, n)), 0o755); err != nil {
			t.Fatal(err)
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

// TestImportLifeBadRowsRefused: each bad row of descriptions.csv,
// aliases.csv, photos.csv (and a photograph's file) is refused with its
// file, line and field, and nothing is written, by import and by import
// --check alike.
func TestImportLifeBadRowsRefused(t *testing.T) {
	t.Parallel()
	db := importDB(t)
	closeup, err := os.ReadFile(filepath.Join(importLife, "photos", "TC-0202-closeup.jpg"))
	if err != nil {
		t.Fatal(err)
	}
	// addPhoto writes a file into the folder's photos and a row naming it.
	addPhoto := func(name string, content []byte) func(t *testing.T, dir string) {
		return func(t *testing.T, dir string) {
			if err := os.WriteFile(filepath.Join(dir, "photos", name), content, 0o644); err != nil {
				t.Fatal(err)
			}
			f, err := os.OpenFile(filepath.Join(dir, "photos.csv"), os.O_APPEND|os.O_WRONLY, 0)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			if _, err := f.WriteString("r5,close-up,photos/" + name + ",,E. Okafor\n"); err != nil {
				t.Fatal(err)
			}
		}
	}
	for _, c := range []struct {
		name    string
		edit    [3]string
		prepare func(t *testing.T, dir string)
		want    []string
	}{
		{name: "description of no mark", edit: [3]string{"descriptions.csv", "TC-0201,brass disk", "TC-0299,brass disk"},
			want: []string{`descriptions.csv line 4 field mark: no mark TC-0299 in the register or in the marks file`}},
		{name: "description without a reason", edit: [3]string{"descriptions.csv", ",position observed with RTK,", ",,"},
			want: []string{`descriptions.csv line 3 field reason: say why the description changed`}},
		{name: "description latitude", edit: [3]string{"descriptions.csv", "39.41876,-104.82544", "139.41876,-104.82544"},
			want: []string{`descriptions.csv line 3 field lat: 139.41876 is outside -90 to 90 degrees`}},
		{name: "alias kind", edit: [3]string{"aliases.csv", "stamped,,,", "stamp,,,"},
			want: []string{`aliases.csv line 3 field kind: "stamp": the kind of an alias is former, stamped or agency`}},
		{name: "agency not named", edit: [3]string{"aliases.csv", "agency,Orrin Bay Harbour Trust,", "agency,,"},
			want: []string{`aliases.csv line 2 field agency: an agency's number names the agency`}},
		{name: "alias is a designation", edit: [3]string{"aliases.csv", "TC-0204,SML-2,", "TC-0204,TC-0201,"},
			want: []string{`aliases.csv line 4 field alias: alias TC-0201 is also the designation on line 2 of the marks file`}},
		{name: "alias twice", edit: [3]string{"aliases.csv", "TC-0204,SML-2,", "TC-0204,orrin 4,"},
			want: []string{`aliases.csv line 4 field alias: alias orrin 4 is also an alias on line 2 of the marks file`}},
		{name: "alias of no mark", edit: [3]string{"aliases.csv", "TC-0204,SML-2,", "TC-0299,SML-2,"},
			want: []string{`aliases.csv line 4 field mark: no mark TC-0299 in the register or in the marks file`}},
		{name: "ref twice", edit: [3]string{"conditions.csv", "r5,TC-0204", "r4,TC-0204"},
			want: []string{`conditions.csv line 6 field ref: ref r4 is given also on line 5`}},
		{name: "photo of no report", edit: [3]string{"photos.csv", "r3,close-up", "r9,close-up"},
			want: []string{`photos.csv line 2 field condition: no condition report with ref r9 in conditions.csv`}},
		{name: "photo view", edit: [3]string{"photos.csv", "r4,setting", "r4,aerial"},
			want: []string{`photos.csv line 4 field view: photos/TC-0202-setting.png: unknown view "aerial"`}},
		{name: "photo outside the folder", edit: [3]string{"photos.csv", "photos/TC-0202-setting.png", "../TC-0202-setting.png"},
			want: []string{`photos.csv line 4 field file: "../TC-0202-setting.png": a photograph is a file in the folder photos`,
				`photos/TC-0202-setting.png: photos.csv names no such file`}},
		{name: "photo missing", edit: [3]string{"photos.csv", "photos/TC-0202-setting.png", "photos/TC-0202-gone.png"},
			want: []string{`photos.csv line 4 field file: open`, `photos/TC-0202-setting.png: photos.csv names no such file`}},
		{name: "photo not an image", prepare: addPhoto("note.jpg", []byte("a note, not a picture")),
			want: []string{`photos.csv line 5 field file: photos/note.jpg: not a JPEG or PNG image`}},
		{name: "photo damaged", prepare: addPhoto(strings.Repeat("0", 64)+".jpg", closeup),
			want: []string{`photos.csv line 5 field file: photos/` + strings.Repeat("0", 64) + `.jpg is named by a SHA-256 that is not its own`}},
		{name: "photo not named", prepare: func(t *testing.T, dir string) {
			if err := os.WriteFile(filepath.Join(dir, "photos", "extra.jpg"), closeup, 0o644); err != nil {
				t.Fatal(err)
			}
		}, want: []string{`photos/extra.jpg: photos.csv names no such file`}},
	} {
		t.Run(c.name, func(t *testing.T) {
			var dir string
			if c.edit[0] != "" {
				dir = importEditFrom(t, importLife, c.edit)
			} else {
				dir = importEditFrom(t, importLife)
			}
			if c.prepare != nil {
				c.prepare(t, dir)
			}
			before := registertest.Counts(t, db.Pool)
			refusedBin(t, db, append([]string{fmt.Sprintf("%d problem(s)", len(c.want)), "nothing written"}, c.want...), "import", dir)
			refusedBin(t, db, c.want, "import", dir, "--check")
			registertest.AssertNothingWritten(t, db.Pool, before)
		})
	}
}
