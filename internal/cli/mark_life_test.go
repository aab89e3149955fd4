package cli

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/jpeg"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"

	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// showMark reads `mark show NAME -o json` through the binary.
func showMark(t *testing.T, db *pgtest.DB, args ...string) (markJSON, string) {
	t.Helper()
	out, errOut := mustBin(t, db, ExitOK, append([]string{"mark", "show"}, append(args, "-o", "json")...)...)
	var j markJSON
	if err := json.Unmarshal([]byte(out), &j); err != nil {
		t.Fatalf("mark show %v -o json: %v\n%s", args, err, out)
	}
	return j, errOut
}

// refusedBin runs the binary expecting a refusal (exit 2) whose message
// holds every one of want, and that nothing was written.
func refusedBin(t *testing.T, db *pgtest.DB, want []string, args ...string) {
	t.Helper()
	before := registertest.Counts(t, db.Pool)
	_, errOut, st := runBin(t, db, args...)
	if st != ExitBadInput {
		t.Errorf("cairn %s: exit %d, want %d: %s", strings.Join(args, " "), st, ExitBadInput, errOut)
	}
	for _, w := range want {
		if !strings.Contains(errOut, w) {
			t.Errorf("cairn %s: %q does not say %q", strings.Join(args, " "), errOut, w)
		}
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// hasDoubt reports whether ds holds a doubt of kind.
func hasDoubt(ds register.Doubts, kind string) bool {
	for _, d := range ds {
		if d.Kind == kind {
			return true
		}
	}
	return false
}

// A mark reset in place keeps its designation; every height recorded
// before the reset report is shown "before reset" by mark show, height
// show and trace, and is refused as held control, with the reason, by
// adjust (even with --allow-condition), run record --hold and publish. A
// replaced mark is retired: mark show of either names the other, the old
// one is refused as held control and gets no new height, and its
// designation is never given again. Through the built binary, on the
// worked circuit (registertest: BM1 held, BM2 to BM6 published from run 1).
func TestResetAndReplacedMarks(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, books := seedWorked(t, db, 1)
	run1 := fmt.Sprint(runs[0])
	a1 := adjustmentID(t, binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "-o", "json"))
	binMustRun(t, db.URL, "publish", a1, "--reason", "circuit of May 2024", "--yes")
	// A draft holding BM1, made before BM1 is reset.
	a2 := adjustmentID(t, binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "-o", "json"))

	// Reset: BM2 disturbed, then reset in place; BM1 reset too.
	binMustRun(t, db.URL, "mark", "condition", "BM2", "disturbed", "--note", "struck by a grader", "--on", "2024-06-01")
	binMustRun(t, db.URL, "mark", "condition", "BM2", "reset", "--note", "disk reset in new concrete", "--on", "2024-06-20")
	binMustRun(t, db.URL, "mark", "condition", "BM1", "reset", "--note", "post re-set after frost heave", "--on", "2024-06-21")

	m, errOut := showMark(t, db, "BM2")
	if m.Designation != "BM2" || m.Condition != "reset" || len(m.Heights) != 1 || !hasDoubt(m.Heights[0].Doubts, register.DoubtBeforeReset) ||
		hasDoubt(m.Doubts, register.DoubtCondition) {
		t.Errorf("mark show BM2 after its reset: condition %q, heights %+v, doubts %+v", m.Condition, m.Heights, m.Doubts)
	}
	if !strings.Contains(errOut, "BEFORE RESET") {
		t.Errorf("mark show BM2: no loud warning of the height before reset: %s", errOut)
	}
	out, _ := mustBin(t, db, ExitOK, "mark", "show", "BM2")
	if row := pipedRow(out, "last reset"); row == nil || !strings.Contains(row[1], "2024-06-20") || !strings.Contains(row[1], "disk reset in new concrete") {
		t.Errorf("mark show BM2 piped: last reset row %q\n%s", row, out)
	}
	out, errOut = mustBin(t, db, ExitOK, "height", "show", "BM2")
	if row := pipedRow(out, "NAVD88"); row == nil || !strings.Contains(row[len(row)-1], "before-reset") {
		t.Errorf("height show BM2 piped: row %q", row)
	}
	if !strings.Contains(errOut, "BEFORE RESET (the mark was reported reset on") || !strings.Contains(errOut, "level the mark again") {
		t.Errorf("height show BM2: warning %q", errOut)
	}
	out, errOut = mustBin(t, db, ExitOK, "trace", "BM2")
	if !strings.Contains(out+errOut, "BEFORE RESET") {
		t.Errorf("trace BM2 does not say its height is from before the reset:\n%s\n%s", out, errOut)
	}

	// A pre-reset height is never held: adjust, with or without leave for
	// conditions in doubt, run record --hold, and publication of a draft
	// made before the reset.
	why := []string{"BM2 on NAVD88, version 1", "BEFORE the mark was reset", "2024-06-20", "disk reset in new concrete", "never held as control"}
	refusedBin(t, db, append([]string{"--hold: "}, why...), "adjust", run1, "--hold", "BM2")
	refusedBin(t, db, why, "adjust", run1, "--hold", "BM2", "--allow-condition", "--reason", "no other control near")
	book := filepath.Join(t.TempDir(), "again.csv")
	if err := os.WriteFile(book, registertest.SideShot(t, append([]byte("# run again\n"), books[0]...), "again"), 0o644); err != nil {
		t.Fatal(err)
	}
	refusedBin(t, db, why, "run", "record", book, "--hold", "BM2")
	refusedBin(t, db, []string{"held mark: BM1 on NAVD88, version 1", "BEFORE the mark was reset", "post re-set after frost heave"},
		"publish", a2, "--reason", "late publication", "--yes")

	// The way out: level the reset marks again from other control. The new
	// versions are recorded after the reset report; they are not before
	// it, and may be held.
	binMustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "BM1", "728.730", "--unit", "m", "--datum", "NAVD88",
		"--source", "Outside control sheet 2 (invented citation)", "--reason", "BM1 levelled again from outside control after its reset")
	a3 := adjustmentID(t, binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "-o", "json"))
	binMustRun(t, db.URL, "publish", a3, "--reason", "BM2 and BM1 levelled again after their reset", "--yes")
	m, _ = showMark(t, db, "BM2")
	if len(m.Heights) != 1 || m.Heights[0].Version != 2 || hasDoubt(m.Heights[0].Doubts, register.DoubtBeforeReset) {
		t.Errorf("mark show BM2 after levelling again: heights %+v", m.Heights)
	}
	out, _ = mustBin(t, db, ExitOK, "history", "BM2")
	if row := pipedRow(out, "NAVD88"); row == nil || strings.Contains(row[len(row)-1], "before-reset") || row[1] != "2" {
		t.Errorf("history BM2: current row %q", row)
	}
	if !strings.Contains(out, "before-reset") {
		t.Errorf("history BM2: version 1 is not shown before reset:\n%s", out)
	}
	mustBin(t, db, ExitOK, "adjust", run1, "--hold", "BM1", "--hold", "BM2", "--dry-run")

	// Replaced: BM3 retired, BM3A in its place.
	binMustRun(t, db.URL, "mark", "replace", "BM3", "BM3A", "--reason", "disk lost in the road works; new disk 3 m east",
		"--on", "2024-07-01", "--directions", "3 m east of the old disk", "--type", "bronze disk")
	old, errOut := showMark(t, db, "BM3")
	if old.Retired == nil || old.Retired.ReplacedBy != "BM3A" || old.Retired.On != "2024-07-01" || !hasDoubt(old.Doubts, register.DoubtRetired) {
		t.Errorf("mark show BM3: retired %+v, doubts %+v", old.Retired, old.Doubts)
	}
	if !strings.Contains(errOut, "RETIRED on 2024-07-01") || !strings.Contains(errOut, "replaced by BM3A") {
		t.Errorf("mark show BM3: warning %q", errOut)
	}
	repl, _ := showMark(t, db, "BM3A")
	if repl.Replaces != "BM3" || repl.Retired != nil || len(repl.Heights) != 0 || repl.Directions != "3 m east of the old disk" {
		t.Errorf("mark show BM3A: replaces %q, retired %+v, heights %d, directions %q", repl.Replaces, repl.Retired, len(repl.Heights), repl.Directions)
	}
	out, _ = mustBin(t, db, ExitOK, "mark", "show", "BM3")
	if row := pipedRow(out, "replaced by"); row == nil || row[1] != "BM3A" {
		t.Errorf("mark show BM3 piped: replaced by %q", row)
	}
	out, _ = mustBin(t, db, ExitOK, "mark", "show", "BM3A")
	if row := pipedRow(out, "replaces"); row == nil || row[1] != "BM3 (retired)" {
		t.Errorf("mark show BM3A piped: replaces %q", row)
	}
	out, _ = mustBin(t, db, ExitOK, "height", "show", "BM3")
	if row := pipedRow(out, "NAVD88"); row == nil || !strings.Contains(row[len(row)-1], "retired") {
		t.Errorf("height show BM3 piped: row %q", row)
	}
	out, errOut = mustBin(t, db, ExitOK, "trace", "BM3")
	if !strings.Contains(out+errOut, "RETIRED on 2024-07-01") {
		t.Errorf("trace BM3 does not say the mark is retired:\n%s\n%s", out, errOut)
	}
	refusedBin(t, db, []string{"--hold: mark BM3 was RETIRED on 2024-07-01", "replaced by BM3A", "never held as control", "hold BM3A"},
		"adjust", run1, "--hold", "BM3")
	refusedBin(t, db, []string{"retired mark gets no new height"},
		"height", "set", "--in-force-from", inForceNow(), "BM3", "1.000", "--unit", "m", "--datum", "NAVD88", "--source", "Outside sheet 2 (invented)", "--reason", "new value")
	refusedBin(t, db, []string{"mark BM3 is already in the register"}, "mark", "add", "BM3")
	refusedBin(t, db, []string{"mark BM3 was retired already"}, "mark", "retire", "BM3", "--reason", "again")
	refusedBin(t, db, []string{"mark BM3 is already in the register"}, "mark", "replace", "BM5", "BM3", "--reason", "x")

	// The evidence holds the new tables' rows, and verifies.
	mustBin(t, db, ExitOK, "audit", "verify")
}

// A publication that reports the re-levelled marks reset (publish
// --report-condition reset) writes the report and the new versions in one
// transaction: the new versions are not before the reset, the old ones
// are.
func TestResetReportedByPublication(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 1)
	run1 := fmt.Sprint(runs[0])
	a1 := adjustmentID(t, binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "-o", "json"))
	binMustRun(t, db.URL, "publish", a1, "--reason", "circuit of May 2024", "--yes")
	binMustRun(t, db.URL, "mark", "condition", "BM3", "disturbed", "--note", "post tilted", "--on", "2024-05-01")
	a2 := adjustmentID(t, binMustRun(t, db.URL, "adjust", run1, "--hold", "BM1", "-o", "json"))
	binMustRun(t, db.URL, "publish", a2, "--reason", "BM3 re-set and levelled again", "--yes",
		"--report-condition", "reset", "--condition-note", "post re-set plumb")
	out, _ := mustBin(t, db, ExitOK, "history", "BM3", "-o", "json")
	var hs []heightJSON
	if err := json.Unmarshal([]byte(out), &hs); err != nil {
		t.Fatalf("history -o json: %v\n%s", err, out)
	}
	if len(hs) != 2 {
		t.Fatalf("history BM3: %d versions", len(hs))
	}
	for _, h := range hs {
		before := hasDoubt(h.Doubts, register.DoubtBeforeReset)
		if before != (h.Version == 1) {
			t.Errorf("history BM3 version %d: before reset %v, doubts %+v", h.Version, before, h.Doubts)
		}
	}
	m, _ := showMark(t, db, "BM3")
	if m.Condition != "reset" || len(m.Doubts) != 0 {
		t.Errorf("mark show BM3: condition %q, doubts %+v", m.Condition, m.Doubts)
	}
}

// A mark is found by any of its aliases, in any case, by every look-up
// (mark show, mark list --name, height show, adjust --hold); an alias is
// never a designation, nor a designation an alias: cairn refuses both, and
// so does the database, whoever writes.
func TestAliasesFindMarksAndNeverMeetDesignations(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 1)
	mustBin(t, db, ExitOK, "mark", "alias", "BM1", "TCDB 88-1", "--kind", "agency", "--agency", "Tallis County Drainage Board")
	mustBin(t, db, ExitOK, "mark", "alias", "BM1", "OLD-7", "--kind", "former", "--note", "its number before 1990")

	m, errOut := showMark(t, db, "tcdb 88-1")
	if m.Designation != "BM1" || m.FoundByAlias != "TCDB 88-1" || strings.Join(m.Aliases, ",") != "TCDB 88-1,OLD-7" ||
		len(m.AliasDetails) != 2 || m.AliasDetails[0].Agency != "Tallis County Drainage Board" || m.AliasDetails[1].Kind != "former" {
		t.Errorf("mark show by alias: %+v", m)
	}
	if !strings.Contains(errOut, "TCDB 88-1 is an alias of mark BM1") {
		t.Errorf("mark show by alias: stderr %q", errOut)
	}
	out, _ := mustBin(t, db, ExitOK, "mark", "list", "--name", "old-7")
	if rows := pipedRows(t, out); len(rows) != 1 || !strings.HasPrefix(rows[0], "BM1\t") || !strings.Contains(rows[0], "TCDB 88-1; OLD-7") {
		t.Errorf("mark list --name old-7: %q", rows)
	}
	out, _ = mustBin(t, db, ExitOK, "height", "show", "Old-7")
	if pipedRow(out, "NAVD88") == nil {
		t.Errorf("height show by alias: %s", out)
	}
	mustBin(t, db, ExitOK, "adjust", fmt.Sprint(runs[0]), "--hold", "TCDB 88-1", "--dry-run")

	// cairn refuses the collisions, naming the mark that has the name.
	refusedBin(t, db, []string{"alias: bm2 is the designation of mark BM2"}, "mark", "alias", "BM1", "bm2", "--kind", "former")
	refusedBin(t, db, []string{"designation: old-7 is an alias of mark BM1 (OLD-7)"}, "mark", "add", "old-7")
	refusedBin(t, db, []string{"Old-7 is already an alias of mark BM1 (as OLD-7)"}, "mark", "alias", "BM2", "Old-7", "--kind", "former")
	refusedBin(t, db, []string{"name the agency"}, "mark", "alias", "BM2", "X1", "--kind", "agency")
	refusedBin(t, db, []string{"not an alias"}, "mark", "alias", "BM2", "X  1", "--kind", "former")

	// A book names its marks by designation: an alias in a book is refused
	// naming its line, with or without --new-marks.
	mustBin(t, db, ExitOK, "mark", "alias", "BM3", "ALT-3", "--kind", "stamped")
	book := filepath.Join(t.TempDir(), "alias.csv")
	text := strings.ReplaceAll(string(registertest.WorkedBook(t, 2)), "\nBM3,", "\nalt-3,")
	if err := os.WriteFile(book, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	refusedBin(t, db, []string{`field "point": "alt-3" is an alias of mark BM3 (ALT-3)`, "write BM3"}, "run", "record", book, "--new-marks")

	// So does the database, for a writer with the recorder's role and for
	// the owner, after NFKC and case folding (the fullwidth Ｂ is B).
	mustRun(t, db.URL, "db", "roles")
	recorder := loginAs(t, db, store.RoleRecorder)
	mustBin(t, db, ExitOK, "mark", "alias", "BM2", "TCDB-88-2", "--kind", "stamped")
	ctx := context.Background()
	for _, url := range []string{recorder, db.URL} {
		conn, err := pgx.Connect(ctx, url)
		if err != nil {
			t.Fatal(err)
		}
		before := registertest.Counts(t, db.Pool)
		for _, q := range []string{
			"INSERT INTO mark_alias (mark_id, alias, kind, recorded_by) SELECT id, 'bm2', 'former', 'x' FROM mark WHERE designation = 'BM1'",
			"INSERT INTO mark_alias (mark_id, alias, kind, recorded_by) SELECT id, 'Ｂm3', 'former', 'x' FROM mark WHERE designation = 'BM1'",
			"INSERT INTO mark (designation, created_by) VALUES ('tcdb-88-2', 'x')",
			"INSERT INTO mark (designation, created_by) VALUES ('Old-7', 'x')",
		} {
			_, err := conn.Exec(ctx, q)
			var pe *pgconn.PgError
			if !errors.As(err, &pe) || pe.Code != "CA018" {
				t.Errorf("%s: %s: err = %v, want SQLSTATE CA018", url, q, err)
			}
		}
		conn.Close(ctx)
		registertest.AssertNothingWritten(t, db.Pool, before)
	}
}

// mark edit writes a new version of a mark's description, whole, with its
// reason; mark show --history lists every version; the database refuses
// to change a mark, or a version, in place. The old flag --to-reach still
// works, hidden, with a notice.
func TestMarkEditHistory(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	mustBin(t, db, ExitOK, "mark", "add", "TC-0412", "--type", "bronze disk", "--setting", "concrete post",
		"--directions", "north end of the Mere River bridge", "--lat", "41.6207", "--lon", "-97.9486")
	mustBin(t, db, ExitOK, "mark", "edit", "TC-0412", "--directions", "from the pump house, 40 m north along the levee",
		"--description", "disk in the top of a concrete post, flush", "--reason", "bridge rebuilt in 2023", "--by", "A. Moreau")
	mustBin(t, db, ExitOK, "mark", "edit", "TC-0412", "--lat", "41.62071", "--lon", "-97.94862",
		"--position-source", "hand-held GNSS, 2024-05-14", "--reason", "position measured on the last visit", "--by", "T. Baptiste")
	_, errOut := mustBin(t, db, ExitOK, "mark", "edit", "TC-0412", "--to-reach", "from the pump house, 45 m north along the levee",
		"--reason", "distance paced again")
	if !strings.Contains(errOut, "--to-reach is deprecated") || !strings.Contains(errOut, "--directions") {
		t.Errorf("mark edit --to-reach: no notice: %q", errOut)
	}
	help, _ := mustBin(t, db, ExitOK, "mark", "edit", "--help")
	if strings.Contains(help, "to-reach") || !strings.Contains(help, "--directions") {
		t.Errorf("mark edit --help shows --to-reach or lacks --directions:\n%s", help)
	}

	m, _ := showMark(t, db, "TC-0412", "--history")
	if m.DescriptionVersion != 4 || len(m.Versions) != 4 || m.Directions != "from the pump house, 45 m north along the levee" ||
		m.Description != "disk in the top of a concrete post, flush" || m.PositionSource != "hand-held GNSS, 2024-05-14" ||
		m.Lat == nil || *m.Lat != 41.62071 || m.Setting != "concrete post" {
		t.Fatalf("mark show --history: %+v", m)
	}
	v := m.Versions
	if v[0].Directions != "north end of the Mere River bridge" || v[0].Reason != "" || *v[0].Lat != 41.6207 ||
		v[1].Reason != "bridge rebuilt in 2023" || v[1].RecordedBy != "A. Moreau" || *v[1].Lat != 41.6207 ||
		v[2].Directions != v[1].Directions || *v[2].Lat != 41.62071 || v[3].Reason != "distance paced again" {
		t.Errorf("versions: %+v", v)
	}
	out, _ := mustBin(t, db, ExitOK, "mark", "show", "TC-0412", "--history")
	if row := pipedRow(out, "version 2"); row == nil || !strings.Contains(row[1], "by A. Moreau: bridge rebuilt in 2023") ||
		!strings.Contains(row[1], `directions "from the pump house, 40 m north along the levee"`) || strings.Contains(row[1], "set in") {
		t.Errorf("mark show --history piped: version 2 %q\n%s", row, out)
	}
	if row := pipedRow(out, "directions"); row == nil || row[1] != "from the pump house, 45 m north along the levee" {
		t.Errorf("mark show piped: directions %q", row)
	}

	refusedBin(t, db, []string{"--reason: "}, "mark", "edit", "TC-0412", "--description", "x")
	refusedBin(t, db, []string{"nothing to change"}, "mark", "edit", "TC-0412", "--setting", "concrete post", "--reason", "r")
	refusedBin(t, db, []string{"both a latitude and a longitude"}, "mark", "edit", "TC-0412", "--lat", "41", "--reason", "r")
	refusedBin(t, db, []string{"old name of --directions"}, "mark", "edit", "TC-0412", "--to-reach", "a", "--directions", "b", "--reason", "r")

	// A near search looks at the current position, not the first.
	mustBin(t, db, ExitOK, "mark", "edit", "TC-0412", "--lat", "41.7000", "--lon", "-97.9486",
		"--position-source", "corrected from the 1961 sketch", "--reason", "the first position was scaled from the wrong sheet")
	for _, c := range []struct {
		near string
		n    int
	}{{"41.7000,-97.9486", 1}, {"41.6207,-97.9486", 0}} {
		out, _ := mustBin(t, db, ExitOK, "mark", "list", "--near", c.near, "--within", "1km")
		if rows := pipedRows(t, out); len(rows) != c.n {
			t.Errorf("mark list --near %s --within 1km: %q, want %d marks", c.near, rows, c.n)
		}
	}

	before := registertest.Counts(t, db.Pool)
	for _, q := range []string{
		"UPDATE mark SET to_reach = 'moved'",
		"DELETE FROM mark",
		"TRUNCATE mark CASCADE",
		"UPDATE mark_version SET directions = 'moved'",
		"DELETE FROM mark_version",
	} {
		_, err := db.Pool.Exec(context.Background(), q)
		var pe *pgconn.PgError
		if !errors.As(err, &pe) || pe.Code != "CA001" {
			t.Errorf("%s: err = %v, want SQLSTATE CA001", q, err)
		}
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// Photographs kept with a condition report: JPEG or PNG (the file's
// content decides, read by the standard library's image decoders), at most
// 8 MiB, given back byte for byte with their SHA-256; anything else is
// refused naming the file, and the database refuses a photo added to an
// earlier report, a hash that is not the content's, and a content that is
// not of its type.
func TestConditionPhotos(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	dir := t.TempDir()
	img := image.NewRGBA(image.Rect(0, 0, 8, 6))
	for i := range img.Pix {
		img.Pix[i] = byte(i * 7)
	}
	var jb, pb bytes.Buffer
	if err := jpeg.Encode(&jb, img, nil); err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(&pb, img); err != nil {
		t.Fatal(err)
	}
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	jpg, pngFile := write("IMG_0412.jpg", jb.Bytes()), write("setting.png", pb.Bytes())
	mustBin(t, db, ExitOK, "mark", "add", "TC-0412")
	mustBin(t, db, ExitOK, "mark", "condition", "TC-0412", "good", "--on", "2024-05-14", "--note", "found as described",
		"--photo", "close-up="+jpg, "--photo", "Setting="+pngFile)

	m, _ := showMark(t, db, "TC-0412")
	if len(m.Photos) != 2 {
		t.Fatalf("mark show: photos %+v", m.Photos)
	}
	for i, want := range []struct {
		view, typ, name string
		content         []byte
	}{{"close-up", "image/jpeg", "IMG_0412.jpg", jb.Bytes()}, {"setting", "image/png", "setting.png", pb.Bytes()}} {
		ph := m.Photos[i]
		sum := sha256.Sum256(want.content)
		if ph.View != want.view || ph.MediaType != want.typ || ph.FileName != want.name || ph.Bytes != int64(len(want.content)) ||
			ph.SHA256 != hex.EncodeToString(sum[:]) || ph.ReportOn != "2024-05-14" {
			t.Errorf("photo %d: %+v", i, ph)
		}
		out := filepath.Join(dir, fmt.Sprintf("back-%d", i))
		mustBin(t, db, ExitOK, "mark", "photo", "TC-0412", fmt.Sprint(ph.ID), "--out", out)
		got, err := os.ReadFile(out)
		if err != nil || !bytes.Equal(got, want.content) {
			t.Errorf("photo %d given back: %d bytes, %v; want the %d bytes given", i, len(got), err, len(want.content))
		}
		refusedBin(t, db, []string{"out: ", "exists"}, "mark", "photo", "TC-0412", fmt.Sprint(ph.ID), "--out", out)
	}
	out, _ := mustBin(t, db, ExitOK, "mark", "show", "TC-0412")
	if row := pipedRow(out, fmt.Sprintf("photo %d", m.Photos[0].ID)); row == nil || !strings.Contains(row[1], "close-up, report of 2024-05-14, IMG_0412.jpg") {
		t.Errorf("mark show piped: photo row %q", row)
	}

	text := write("notes.jpg", []byte("not a photograph\n"))
	big := write("huge.png", append(append([]byte{}, pb.Bytes()...), make([]byte, store.PhotoMaxBytes)...))
	refusedBin(t, db, []string{"--photo: notes.jpg: not a JPEG or PNG image"}, "mark", "condition", "TC-0412", "good", "--photo", "close-up="+text)
	refusedBin(t, db, []string{"huge.png", "8 MiB"}, "mark", "condition", "TC-0412", "good", "--photo", "setting="+big)
	refusedBin(t, db, []string{"unknown view \"sideways\""}, "mark", "condition", "TC-0412", "good", "--photo", "sideways="+jpg)
	refusedBin(t, db, []string{"give VIEW=FILE"}, "mark", "condition", "TC-0412", "good", "--photo", jpg)
	refusedBin(t, db, []string{"no photograph 99"}, "mark", "photo", "TC-0412", "99", "--out", filepath.Join(dir, "x"))

	ctx := context.Background()
	before := registertest.Counts(t, db.Pool)
	sum := sha256.Sum256(jb.Bytes())
	for _, c := range []struct {
		q    string
		args []any
		code string
	}{
		{"INSERT INTO condition_photo (condition_id, view, media_type, content, sha256, recorded_by) SELECT min(id), 'close-up', 'image/jpeg', $1, $2, 'x' FROM mark_condition",
			[]any{jb.Bytes(), sum[:]}, "CA004"},
		{"UPDATE condition_photo SET file_name = 'renamed.jpg'", nil, "CA001"},
		{"DELETE FROM condition_photo", nil, "CA001"},
	} {
		_, err := db.Pool.Exec(ctx, c.q, c.args...)
		var pe *pgconn.PgError
		if !errors.As(err, &pe) || pe.Code != c.code {
			t.Errorf("%s: err = %v, want SQLSTATE %s", c.q, err, c.code)
		}
	}
	// In the report's own transaction: a hash not of the content, and a
	// content not of its type, are refused by their CHECKs.
	for _, c := range []struct {
		typ        string
		content    []byte
		constraint string
	}{{"image/jpeg", jb.Bytes(), "condition_photo_hash"}, {"image/png", []byte("not a photograph"), "condition_photo_format"}} {
		tx, err := db.Pool.Begin(ctx)
		if err != nil {
			t.Fatal(err)
		}
		var cid int64
		if err := tx.QueryRow(ctx, "INSERT INTO mark_condition (mark_id, condition, observed_on, recorded_by) SELECT id, 'good', '2024-05-15', 'x' FROM mark RETURNING id").Scan(&cid); err != nil {
			t.Fatal(err)
		}
		good := sha256.Sum256(c.content)
		hash := good[:]
		if c.constraint == "condition_photo_hash" {
			hash = sum[:4]
		}
		_, err = tx.Exec(ctx, "INSERT INTO condition_photo (condition_id, view, media_type, content, sha256, recorded_by) VALUES ($1, 'setting', $2, $3, $4, 'x')",
			cid, c.typ, c.content, hash)
		var pe *pgconn.PgError
		if !errors.As(err, &pe) || pe.ConstraintName != c.constraint {
			t.Errorf("%s: err = %v, want the CHECK %s", c.constraint, err, c.constraint)
		}
		tx.Rollback(ctx)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
	mustBin(t, db, ExitOK, "audit", "verify")
}

// pngPhoto writes a small PNG photograph in a temporary directory and
// returns its path.
func pngPhoto(t *testing.T) string {
	t.Helper()
	var b bytes.Buffer
	if err := png.Encode(&b, image.NewGray(image.Rect(0, 0, 4, 4))); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "close-up.png")
	if err := os.WriteFile(p, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}
