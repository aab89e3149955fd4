package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os/exec"
	"regexp"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// runBin runs the built cairn on db with args and returns its stdout,
// stderr and exit status.
func runBin(t *testing.T, db *pgtest.DB, args ...string) (stdout, stderr string, status int) {
	t.Helper()
	var out, errOut bytes.Buffer
	cmd := exec.Command(cairnBinary(t), append([]string{"--db", db.URL}, args...)...)
	cmd.Stdout, cmd.Stderr = &out, &errOut
	err := cmd.Run()
	if ee, ok := err.(*exec.ExitError); ok {
		return out.String(), errOut.String(), ee.ExitCode()
	} else if err != nil {
		t.Fatalf("cairn %s: %v", strings.Join(args, " "), err)
	}
	return out.String(), errOut.String(), 0
}

// mustBin is runBin that fails the test unless cairn exits with want.
func mustBin(t *testing.T, db *pgtest.DB, want int, args ...string) (stdout, stderr string) {
	t.Helper()
	out, errOut, st := runBin(t, db, args...)
	if st != want {
		t.Fatalf("cairn %s: exit %d, want %d: %s", strings.Join(args, " "), st, want, errOut)
	}
	return out, errOut
}

// adjustmentID reads the adjustment's number from adjust -o json.
func adjustmentID(t *testing.T, out string) string {
	t.Helper()
	var rep adjustmentJSON
	if err := json.Unmarshal([]byte(out), &rep); err != nil || rep.AdjustmentID == nil {
		t.Fatalf("adjust -o json: %v: %s", err, out)
	}
	return fmt.Sprint(*rep.AdjustmentID)
}

// A book in metres labelled US survey feet, the mistake no check of the
// book catches: cairn records it (with the acceptance its unchecked line
// needs), adjusts it between its two held marks (exit 3, misclosure over
// the allowable), and then refuses to publish it (exit 2, nothing
// written) until the failed check is accepted on purpose, with a reason;
// trace, history and adjustment show then say so loudly.
//
// The numbers, from the book (testdata/books/mere-river-line.csv, written
// in metres) read as US survey feet: Σ backsights − Σ foresights =
// 13.5546 − 11.9639 = 1.5907 book units; a US survey foot is 1200/3937 m
// (Federal Register Vol. 85 No. 193, 2020), so the line rises 0.48485 m,
// not 1.5907 m; from TC-0420 held at 3.512 m it reaches TC-0427 at
// 3.99685 m against 5.104 m held: misclosure −1.10715 m. The distances,
// Σ 619.5 usft = 188.8 m, give second order class I an allowable of
// 6 mm·√0.1888 = 2.6 mm (FGCC 1984, from memory, as standards cites it).
func TestPublishRefusesFailedChecks(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	b := registertest.On(t, db)
	b.Datum(t, registertest.DatumOpts{Code: "OBLD61", Name: "Orrin Bay Local Datum 1961"})
	b.Marks(t, "TC-0420", "TC-0423", "TC-0427")
	b.Height(t, registertest.HeightOpts{Designation: "TC-0420", Value: "3.512", Unit: "m"})
	b.Height(t, registertest.HeightOpts{Designation: "TC-0427", Value: "5.104", Unit: "m"})
	metres := string(registertest.Testdata(t, "books/mere-river-line.csv"))
	labelled := strings.Replace(metres, "# units: m\n", "# units: usft\n", 1)
	if labelled == metres {
		t.Fatal("the book's units line was not found")
	}
	book := writeBook(t, "levee-line.csv", []byte(labelled))

	mustBin(t, db, 0, "run", "record", book, "--by", "recorder",
		"--accept-failed-checks", "--reason", "a line between two held marks, checked by its adjustment")
	out, _ := mustBin(t, db, ExitChecks, "adjust", "1", "--hold", "TC-0420", "--hold", "TC-0427", "--by", "adjuster", "-o", "json")
	id := adjustmentID(t, out)

	before := registertest.Counts(t, db.Pool)
	_, errOut, st := runBin(t, db, "publish", id, "--reason", "levee line", "--by", "reviewer", "--yes")
	want := "cairn: adjustment 1: 1 check(s) failed, nothing was published:\n" +
		"  misclosure: run 1, TC-0420 to TC-0427: misclosure -1.1072 m over 0.189 km exceeds the allowable 0.0026 m (second-I)\n" +
		"to publish it anyway, give --accept-failed-checks with --accept-reason saying why the failed checks are accepted\n"
	if st != ExitBadInput || errOut != want {
		t.Fatalf("publish of a failed draft: exit %d, stderr\n%s\nwant exit 2 and\n%s", st, errOut, want)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
	// The acceptance needs its own reason; the publication's is another.
	if _, errOut, st := runBin(t, db, "publish", id, "--reason", "levee line", "--yes", "--accept-failed-checks"); st != ExitBadInput ||
		!strings.Contains(errOut, "--accept-failed-checks needs --accept-reason") {
		t.Fatalf("acceptance without its reason: exit %d, %s", st, errOut)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)

	const why = "book known to be in metres; published for the record, to be re-run"
	out, errOut = mustBin(t, db, 0, "publish", id, "--reason", "levee line", "--by", "reviewer", "--yes",
		"--accept-failed-checks", "--accept-reason", why, "-o", "json")
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"adjustment_event": 1, "height": 1, "register_commit": 1})
	var pub publishJSON
	if err := json.Unmarshal([]byte(out), &pub); err != nil {
		t.Fatal(err)
	}
	acc := pub.AcceptedFailedChecks
	if acc == nil || acc.Reason != why || acc.By != "reviewer" || len(acc.Checks) != 1 || acc.Checks[0].Kind != "misclosure" ||
		deref(acc.Checks[0].RunID) != 1 {
		t.Fatalf("publish -o json: accepted_failed_checks %+v", acc)
	}
	var stored string
	if err := db.Pool.QueryRow(context.Background(), "SELECT accepted_reason FROM adjustment_event WHERE adjustment_id = $1", id).Scan(&stored); err != nil || stored != why {
		t.Fatalf("stored acceptance %q (%v)", stored, err)
	}

	loud := "PUBLISHED WITH FAILED CHECKS ACCEPTED by reviewer on "
	check := "accepted misclosure: run 1, TC-0420 to TC-0427: misclosure -1.1072 m over 0.189 km exceeds the allowable 0.0026 m (second-I)"
	out, _ = mustBin(t, db, 0, "trace", "TC-0423")
	if !strings.Contains(out, `run 1 "Mere River levee line" (observed 2024-06-03, class second-I): book levee-line.csv`) {
		t.Errorf("trace does not give the run's date and class:\n%s", out)
	}
	if !strings.Contains(out, loud) || !strings.Contains(out, ": "+why) || !strings.Contains(out, check) {
		t.Errorf("trace does not show the acceptance:\n%s", out)
	}
	_, errOut = mustBin(t, db, 0, "history", "TC-0423")
	if !strings.Contains(errOut, "WARNING: TC-0423 on OBLD61, version 1: adjustment "+id+" was PUBLISHED WITH FAILED CHECKS ACCEPTED by reviewer on ") ||
		!strings.Contains(errOut, why) || !strings.Contains(errOut, check) {
		t.Errorf("history does not show the acceptance:\n%s", errOut)
	}
	_, errOut = mustBin(t, db, 0, "adjustment", "show", id)
	if !strings.Contains(errOut, loud) || !strings.Contains(errOut, why) || !strings.Contains(errOut, check) {
		t.Errorf("adjustment show does not show the acceptance:\n%s", errOut)
	}

	var tr traceJSON
	out, _ = mustBin(t, db, 0, "trace", "TC-0423", "-o", "json")
	if err := json.Unmarshal([]byte(out), &tr); err != nil {
		t.Fatal(err)
	}
	if a := tr.Versions[0].Adjustment; a == nil || a.AcceptedFailedChecks == nil || a.AcceptedFailedChecks.Reason != why {
		t.Errorf("trace -o json: no acceptance: %s", out)
	}
	var hist []struct {
		Accepted *acceptanceJSON `json:"accepted_failed_checks"`
	}
	out, _ = mustBin(t, db, 0, "history", "TC-0423", "-o", "json")
	if err := json.Unmarshal([]byte(out), &hist); err != nil || len(hist) != 1 || hist[0].Accepted == nil || hist[0].Accepted.Reason != why {
		t.Errorf("history -o json: %v: %s", err, out)
	}
	var show adjustmentJSON
	out, _ = mustBin(t, db, 0, "adjustment", "show", id, "-o", "json")
	if err := json.Unmarshal([]byte(out), &show); err != nil || show.AcceptedFailedChecks == nil ||
		show.AcceptedFailedChecks.Reason != why || show.AcceptedFailedChecks.Checks[0].Kind != "misclosure" {
		t.Errorf("adjustment show -o json: %v: %s", err, out)
	}
	// A held mark's own height is not what was accepted: the held marks
	// still trace as held fixed.
	if h := tr.Versions[0].Adjustment.Held; len(h) != 2 || h[0].HeldAs != "fixed" || h[1].HeldAs != "fixed" {
		t.Errorf("trace -o json: held %+v, want both fixed", h)
	}
}

// A held mark reported destroyed between adjust and publish stops the
// publication (exit 2, nothing written); accepted on purpose, it is
// published, and the acceptance names the report.
func TestPublishRechecksHeldCondition(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	out, _ := mustBin(t, db, 0, "adjust", "1", "--hold", "BM1", "--by", "adjuster", "-o", "json")
	id := adjustmentID(t, out)
	mustBin(t, db, 0, "mark", "condition", "BM1", "destroyed", "--on", "2025-02-01", "--note", "culvert replaced", "--by", "inspector")

	before := registertest.Counts(t, db.Pool)
	_, errOut, st := runBin(t, db, "publish", id, "--reason", "worked circuit", "--by", "reviewer", "--yes")
	want := "cairn: adjustment 1: 1 check(s) failed, nothing was published:\n" +
		"  held-mark-condition: held mark BM1 was reported destroyed on 2025-02-01 (culvert replaced) by inspector, after the draft was made\n" +
		"to publish it anyway, give --accept-failed-checks with --accept-reason saying why the failed checks are accepted\n"
	if st != ExitBadInput || errOut != want {
		t.Fatalf("publish over a destroyed held mark: exit %d, stderr\n%s\nwant exit 2 and\n%s", st, errOut, want)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)

	const why = "BM1 re-set and levelled from BM0 before the culvert works (field note 17)"
	mustBin(t, db, 0, "publish", id, "--reason", "worked circuit", "--by", "reviewer", "--yes",
		"--accept-failed-checks", "--accept-reason", why)
	registertest.AssertWrote(t, db.Pool, before, map[string]int64{"adjustment_event": 1, "height": 5, "register_commit": 1})
	var show adjustmentJSON
	out, _ = mustBin(t, db, 0, "adjustment", "show", id, "-o", "json")
	if err := json.Unmarshal([]byte(out), &show); err != nil {
		t.Fatal(err)
	}
	acc := show.AcceptedFailedChecks
	if acc == nil || acc.Reason != why || len(acc.Checks) != 1 || acc.Checks[0].Kind != "held-mark-condition" || acc.Checks[0].Mark != "BM1" ||
		!strings.Contains(acc.Checks[0].Message, "destroyed on 2025-02-01") {
		t.Fatalf("adjustment show -o json: accepted_failed_checks %+v", acc)
	}
}

// Publishing or discarding an adjustment already published or discarded
// can never succeed: exit 2 with a plain message, nothing written (the
// race of two publishers stays exit 4: TestPublishRaceProcesses).
func TestPublishDiscardNotDraft(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	published := adjustmentID(t, mustRun(t, db.URL, "adjust", "1", "--hold", "BM1", "-o", "json"))
	discarded := adjustmentID(t, mustRun(t, db.URL, "adjust", "1", "--hold", "BM1", "-o", "json"))
	mustRun(t, db.URL, "publish", published, "--reason", "worked circuit, reviewed", "--by", "reviewer", "--yes")
	mustRun(t, db.URL, "discard", discarded, "--reason", "a second try follows", "--by", "clerk", "--yes")

	before := registertest.Counts(t, db.Pool)
	const when = `\d{4}-\d\d-\d\d \d\d:\d\d:\d\dZ`
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"publish", published, "--reason", "again", "--yes"},
			`^cairn: adjustment 1 was published on ` + when + ` by reviewer \(worked circuit, reviewed\): it cannot be published again\n$`},
		{[]string{"discard", published, "--reason", "again", "--yes"},
			`^cairn: adjustment 1 was published on ` + when + ` by reviewer \(worked circuit, reviewed\): it cannot be discarded\n$`},
		{[]string{"publish", discarded, "--reason", "again", "--yes"},
			`^cairn: adjustment 2 was discarded on ` + when + ` by clerk \(a second try follows\): it cannot be published\n$`},
		{[]string{"discard", discarded, "--reason", "again", "--yes"},
			`^cairn: adjustment 2 was discarded on ` + when + ` by clerk \(a second try follows\): it cannot be discarded again\n$`},
	} {
		_, errOut, st := runBin(t, db, c.args...)
		if st != ExitBadInput || !regexp.MustCompile(c.want).MatchString(errOut) {
			t.Errorf("cairn %s: exit %d, %q; want exit 2 matching %s", strings.Join(c.args, " "), st, errOut, c.want)
		}
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
}

// The confirmation lists each mark, current → new, change, unit and class,
// the current value converted exactly to the unit published, and calls out
// a change over --large-change-m and a change of unit: on a terminal
// before the question, piped in the report, and in -o json.
//
// Worked circuit (docs/references.md, example 1): BM2 is published at
// 783.255 m and BM4 at 843.337 m. BM2 now stands at 2569.730 usft, which
// is 783.2553 m at 1200/3937 m to the US survey foot (Federal Register
// Vol. 85 No. 193, 2020), 783.255 m to 3 decimals: no change, but the unit
// changes. (2569.730 × 1200 / 3937 = 783.25527.) BM4 stands at 843.237 m: a change of +0.100 m, over 0.05 m.
func TestPublishShowsChanges(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	b := registertest.On(t, db)
	b.Height(t, registertest.HeightOpts{Designation: "BM2", Datum: "NAVD88", Value: "2569.730", Unit: "usft", Class: "second-I"})
	b.Height(t, registertest.HeightOpts{Designation: "BM4", Datum: "NAVD88", Value: "843.237", Unit: "m"})
	first := adjustmentID(t, mustRun(t, db.URL, "adjust", "1", "--hold", "BM1", "-o", "json"))

	// On a terminal: the list and the call-outs come before the question;
	// answered no, nothing is written.
	before := registertest.Counts(t, db.Pool)
	ios, in, _, errOut := TestStreams(true)
	ios.SetCanPrompt(true)
	in.WriteString("n\n")
	f := NewFactory(ios, "test")
	defer f.Close()
	err := Execute(context.Background(), f, []string{"--db", db.URL, "publish", first, "--reason", "r", "--by", "reviewer"})
	if exitCode(err) != ExitBadInput || !strings.Contains(err.Error(), "not confirmed") {
		t.Fatalf("publish answered no: %v", err)
	}
	registertest.AssertNothingWritten(t, db.Pool, before)
	asked := errOut.String()
	// The aligned rows, as words.
	rows := map[string]string{}
	for _, line := range strings.Split(asked, "\n") {
		if w := strings.Fields(line); len(w) > 0 {
			rows[w[0]] = strings.Join(w, " ")
		}
	}
	for mark, want := range map[string]string{
		"MARK": "MARK CURRENT (in UNIT) NEW (in UNIT) CHANGE (in UNIT) UNIT CLASS NOTE",
		"BM2":  "BM2 783.255 783.255 +0.000 m second-I -> (none) UNIT CHANGES: was 2569.730 usft",
		"BM3":  "BM3 (first) 891.854 m",
		"BM4":  "BM4 843.237 843.337 +0.100 m LARGE CHANGE",
	} {
		if rows[mark] != want {
			t.Errorf("the confirmation's row %q, want %q:\n%s", rows[mark], want, asked)
		}
	}
	for _, want := range []string{
		"Adjustment 1 would publish 5 new height(s) on NAVD88:",
		"LARGE CHANGE: BM4 changes by +0.100 m, more than 0.05 m: from 843.237 m to 843.337 m",
		"UNIT CHANGES: BM2 was published in usft (2569.730 usft, exactly 783.255 m) and will be published in m",
	} {
		if !strings.Contains(asked, want) {
			t.Errorf("the confirmation lacks %q:\n%s", want, asked)
		}
	}
	if q := "Publish 5 new height(s) on NAVD88 from adjustment 1? [y/N] "; !strings.HasSuffix(asked, q) {
		t.Errorf("the question %q does not end the confirmation:\n%s", q, asked)
	}

	// A threshold over the change calls out only the unit.
	out, errText := mustBin(t, db, 0, "publish", first, "--reason", "r", "--by", "reviewer", "--yes", "--large-change-m", "0.2")
	// The call-out is in the report on stdout, and repeated on stderr
	// since stdout is piped.
	if strings.Contains(out+errText, "LARGE CHANGE") || !strings.Contains(errText, "UNIT CHANGES: BM2") || !strings.Contains(out, "UNIT CHANGES: BM2") {
		t.Errorf("with --large-change-m 0.2: stdout\n%s\nstderr\n%s", out, errText)
	}
	// Piped, the whole report is on stdout, aligned, the new version
	// numbered, with the cautions.
	rows = map[string]string{}
	for _, line := range strings.Split(out, "\n") {
		if w := strings.Fields(line); len(w) > 0 {
			rows[w[0]] = strings.Join(w, " ")
		}
	}
	if rows["BM4"] != "BM4 2 843.237 843.337 +0.100 m" || rows["BM2"] != "BM2 2 783.255 783.255 +0.000 m second-I -> (none) UNIT CHANGES: was 2569.730 usft" ||
		!strings.HasPrefix(out, "Published adjustment 1: 5 new height version(s) on NAVD88, by reviewer: r\n") || !strings.Contains(out, "licensed surveyor") {
		t.Errorf("publish report piped:\n%s", out)
	}

	// -o json: the same list, against the versions now in force.
	mustRun(t, db.URL, "height", "set", "--in-force-from", inForceNow(), "BM4", "843.437", "--unit", "m", "--datum", "NAVD88",
		"--source", "outside check (invented)", "--reason", "check", "--by", "tester")
	second := adjustmentID(t, mustRun(t, db.URL, "adjust", "1", "--hold", "BM1", "-o", "json"))
	out, _ = mustBin(t, db, 0, "publish", second, "--reason", "r", "--by", "reviewer", "--yes", "-o", "json")
	var pub publishJSON
	if err := json.Unmarshal([]byte(out), &pub); err != nil {
		t.Fatal(err)
	}
	byMark := map[string]markChangeJSON{}
	for _, c := range pub.Changes {
		byMark[c.Mark] = c
	}
	bm2, bm4 := byMark["BM2"], byMark["BM4"]
	if len(pub.Changes) != 5 || pub.LargeChangeM != 0.05 || pub.AcceptedFailedChecks != nil ||
		deref(bm4.CurrentValue) != "843.437" || bm4.NewValue != "843.337" || deref(bm4.Change) != "-0.100" || !bm4.LargeChange ||
		bm4.UnitChange || deref(bm4.CurrentVersion) != 3 ||
		deref(bm2.CurrentUnit) != "m" || bm2.UnitChange || bm2.LargeChange || deref(bm2.Change) != "+0.000" {
		t.Errorf("publish -o json: %s", out)
	}
}

// trace gives each run's date and class, and how each held mark was held
// (register.Parameters.HeldAs): fixed, weighted with its standard
// deviation, or a check mark of a minimally constrained adjustment.
func TestTraceShowsHowMarksWereHeld(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	// BM2 gets a height of its own, to be held next.
	mustRun(t, db.URL, "publish", adjustmentID(t, mustRun(t, db.URL, "adjust", "1", "--hold", "BM1", "-o", "json")),
		"--reason", "worked circuit", "--yes")
	publish := func(args ...string) {
		t.Helper()
		out, _, _ := run(t, db.URL, append([]string{"adjust", "1", "--method", "least-squares", "-o", "json"}, args...)...)
		// A loop misclosing by 0.244 m over 30.5 km fails its tests at the
		// default σ₀; accepted here, as the test is of the trace.
		mustRun(t, db.URL, "publish", adjustmentID(t, out), "--reason", "least squares", "--yes",
			"--accept-failed-checks", "--accept-reason", "a test of the trace")
	}
	traced := func() (string, traceJSON) {
		t.Helper()
		var tr traceJSON
		if err := json.Unmarshal([]byte(mustRun(t, db.URL, "trace", "BM4", "-o", "json")), &tr); err != nil {
			t.Fatal(err)
		}
		return mustRun(t, db.URL, "trace", "BM4"), tr
	}

	publish("--hold", "BM1", "--hold-weighted", "BM2=5")
	text, tr := traced()
	held := tr.Versions[0].Adjustment.Held
	if len(held) != 2 || held[0].Mark != "BM1" || held[0].HeldAs != "fixed" || held[1].Mark != "BM2" || held[1].HeldAs != "weighted" ||
		deref(held[1].HeldSDMM) != 5 {
		t.Fatalf("trace -o json: held %+v", held)
	}
	for _, want := range []string{"held fixed:\n", "held weighted, sd 5 mm:\n", `run 1 "Worked circuit" (observed 2024-05-14, class not booked): book worked-circuit.csv`} {
		if !strings.Contains(text, want) {
			t.Errorf("trace lacks %q:\n%s", want, text)
		}
	}

	publish("--hold", "BM1", "--hold", "BM2", "--minimal")
	text, tr = traced()
	if held := tr.Versions[0].Adjustment.Held; len(held) != 2 || held[0].HeldAs != "fixed" || held[1].HeldAs != "check" || held[1].HeldSDMM != nil {
		t.Fatalf("trace -o json, minimal: held %+v", held)
	}
	if want := "check mark (minimally constrained: adjusted from the first held mark, not held):\n"; !strings.Contains(text, want) {
		t.Errorf("trace lacks %q:\n%s", want, text)
	}
}

// No message carries its program's name twice: cairn's own ("cairn:
// cairn publish wants ...") or pg_restore's ("pg_restore: pg_restore:").
func TestNoDoubledPrefixes(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	if _, errOut, st := runBin(t, db, "publish"); st != ExitBadInput || errOut != "cairn: publish wants an ADJUSTMENT number (got 0 argument(s))\n" {
		t.Errorf("publish without its argument: exit %d, %q", st, errOut)
	}
	if _, errOut, st := runBin(t, db, "run", "record"); st != ExitBadInput || errOut != "cairn: run record wants one level book (got 0 argument(s))\n" {
		t.Errorf("run record without its argument: exit %d, %q", st, errOut)
	}
	junk := writeBook(t, "junk.dump", []byte("PGDMP but not really"))
	other := &pgtest.DB{URL: freshDatabase(t, db)}
	_, errOut, st := runBin(t, other, "restore", junk)
	if st != ExitBadInput || !strings.Contains(errOut, "is not a backup cairn can read: pg_restore: ") ||
		strings.Contains(errOut, "pg_restore: pg_restore") || strings.Contains(errOut, "cairn: cairn") {
		t.Errorf("restore of junk: exit %d, %q", st, errOut)
	}
}
