package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/registertest"
)

// A signed statement verifies; one byte changed, or another key, fails.
// A wholesale rewrite (a row changed and every manifest, digest and hash
// recomputed in SQL) passes plain verify but not verify --against the
// statement made before it.
func TestStatementSignedAndRewriteCaught(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	ctx := context.Background()
	runs, _ := seedWorked(t, db, 1)
	id := adjustForTest(t, db.URL, fmt.Sprint(runs[0]))
	mustRun(t, db.URL, "publish", id, "--reason", "worked circuit, reviewed", "--yes")

	dir := t.TempDir()
	key := filepath.Join(dir, "office.key")
	_, out, st := run(t, db.URL, "audit", "key", "new", key)
	if st != ExitOK || !strings.Contains(out, "public key ") {
		t.Fatalf("audit key new: exit %d, %s", st, out)
	}
	if fi, err := os.Stat(key); err != nil || fi.Mode().Perm() != 0o600 {
		t.Fatalf("key file: %v %v", fi, err)
	}
	stmt, errOut, st := run(t, db.URL, "audit", "head", "--key", key)
	if st != ExitOK || !strings.Contains(stmt, `"signature"`) {
		t.Fatalf("audit head: exit %d, %s %s", st, stmt, errOut)
	}
	sfile := filepath.Join(dir, "s1.json")
	os.WriteFile(sfile, []byte(stmt), 0o644)
	if _, errOut, st := run(t, db.URL, "audit", "verify", "--against", sfile); st != ExitOK || !strings.Contains(errOut, "signature verifies") {
		t.Fatalf("verify against a signed statement: exit %d, %s", st, errOut)
	}
	// The same in JSON: one document with the evidence and the statement.
	out, errOut, st = run(t, db.URL, "audit", "verify", "--against", sfile, "-o", "json")
	doc := auditDoc(t, out)
	if st != ExitOK || !doc.Verified || doc.Evidence.Commits == 0 || len(doc.Evidence.Head) != 64 ||
		doc.Statement == nil || !doc.Statement.Signed || doc.Statement.PublicKey == "" || doc.Evidence.Against == nil {
		t.Fatalf("verify -o json against a signed statement: exit %d, %+v, %s", st, doc, errOut)
	}
	// One byte changed: a digit of the head hash.
	i := strings.Index(stmt, `"head": "`) + len(`"head": "`)
	bad := []byte(stmt)
	if bad[i] == '0' {
		bad[i] = '1'
	} else {
		bad[i] = '0'
	}
	tampered := filepath.Join(dir, "tampered.json")
	os.WriteFile(tampered, bad, 0o644)
	if _, errOut, st := run(t, db.URL, "audit", "verify", "--against", tampered); st != ExitChecks || !strings.Contains(errOut, "signature does not verify") {
		t.Errorf("verify against a statement with one byte changed: exit %d, %s", st, errOut)
	}
	other := filepath.Join(dir, "other.key")
	_, out, _ = run(t, db.URL, "audit", "key", "new", other)
	otherPub := strings.TrimSpace(strings.TrimPrefix(strings.TrimSpace(out), "public key"))
	if _, errOut, st := run(t, db.URL, "audit", "verify", "--against", sfile, "--public-key", otherPub); st != ExitChecks || !strings.Contains(errOut, "not the key given") {
		t.Errorf("verify with another public key: exit %d, %s", st, errOut)
	}

	// The register grows; the statement still holds.
	mustRun(t, db.URL, "mark", "add", "TC-0900", "--by", "tester")
	if _, errOut, st := run(t, db.URL, "audit", "verify", "--against", sfile); st != ExitOK || !strings.Contains(errOut, "only grew") {
		t.Fatalf("verify after growth: exit %d, %s", st, errOut)
	}

	// The wholesale rewrite, by the superuser.
	conn, err := db.Pool.Acquire(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		"SET session_replication_role = replica",
		"UPDATE mark SET stamping = 'REWRITTEN' WHERE id = (SELECT min(id) FROM mark)",
		`DO $$
		DECLARE c record; h bytea; man text; dig bytea;
		BEGIN
			FOR c IN SELECT * FROM register_commit ORDER BY seq LOOP
				man := cairn_commit_manifest(CASE WHEN c.seq = 0 THEN NULL ELSE c.xid END);
				dig := sha256(convert_to(man, 'UTF8'));
				h := sha256(convert_to(cairn_commit_text(h, c.seq, c.xid, c.committed_at, c.login, dig), 'UTF8'));
				UPDATE register_commit SET manifest = man, digest = dig, hash = h WHERE seq = c.seq;
			END LOOP;
		END $$`,
		"SET session_replication_role = origin",
	} {
		if _, err := conn.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	conn.Release()
	if _, errOut, st := run(t, db.URL, "audit", "verify"); st != ExitOK {
		t.Errorf("plain verify after a wholesale rewrite: exit %d, %s (it cannot see it; want 0)", st, errOut)
	}
	out, _, st = run(t, db.URL, "audit", "verify", "--against", sfile, "-o", "json")
	if doc := auditDoc(t, out); st != ExitChecks || doc.Verified || len(doc.Evidence.Breaks) == 0 || doc.Statement == nil {
		t.Errorf("verify -o json --against after a wholesale rewrite: exit %d, %+v", st, doc)
	}
	if _, errOut, st := run(t, db.URL, "audit", "verify", "--against", sfile); st != ExitChecks || !strings.Contains(errOut, "changed, removed or reordered") {
		t.Errorf("verify --against after a wholesale rewrite: exit %d, %s", st, errOut)
	}
}

// backup writes a statement beside the dump; restore checks it, and fails
// when it does not hold.
func TestBackupStatementRestoreChecks(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	seedWorked(t, db, 1)
	file := filepath.Join(t.TempDir(), "register.dump")
	if _, errOut, st := run(t, db.URL, "backup", file); st != ExitOK || !strings.Contains(errOut, "statement of commit") {
		t.Fatalf("backup: exit %d, %s", st, errOut)
	}
	data, err := os.ReadFile(file + ".statement.json")
	if err != nil || !bytes.Contains(data, []byte(`"head"`)) {
		t.Fatalf("statement beside the dump: %v %s", err, data)
	}
	if _, errOut, st := run(t, freshDatabase(t, db), "restore", file); st != ExitOK || !strings.Contains(errOut, "only grew") {
		t.Fatalf("restore: exit %d, %s", st, errOut)
	}
	// A statement naming a later commit than the dump holds.
	bad := bytes.Replace(data, []byte(`"seq": `), []byte(`"seq": 9`), 1)
	os.WriteFile(file+".statement.json", bad, 0o644)
	_, errOut, st := run(t, freshDatabase(t, db), "restore", file)
	if dropKeptRestore(t, db, errOut); st != ExitChecks || !strings.Contains(errOut, "does not hold") {
		t.Errorf("restore against a statement that does not hold: exit %d, %s", st, errOut)
	}
}

// auditDocJSON is the part of audit verify's JSON the tests read.
type auditDocJSON struct {
	Verified bool `json:"verified"`
	Versions int  `json:"versions"`
	Evidence struct {
		Commits int64  `json:"commits"`
		Head    string `json:"head"`
		Against *int64 `json:"against_seq"`
		Breaks  []struct {
			Problem string `json:"problem"`
		} `json:"breaks"`
	} `json:"evidence"`
	Statement *struct {
		Signed    bool   `json:"signed"`
		PublicKey string `json:"public_key"`
	} `json:"statement"`
}

func auditDoc(t *testing.T, out string) auditDocJSON {
	t.Helper()
	var d auditDocJSON
	if err := json.Unmarshal([]byte(out), &d); err != nil {
		t.Fatalf("audit verify -o json: %v\n%s", err, out)
	}
	return d
}

// audit verify --since: from a signed statement of a register, a
// publication afterwards is audited alone (its chains, its run, its
// adjustment, its commits), and a version of it edited behind cairn's back
// is found. A row edited before the statement is not seen by --since, as
// its help says, and the whole audit finds it. A statement whose commit's
// stored hash no longer matches is refused, sending to the whole audit.
func TestAuditVerifySince(t *testing.T) {
	t.Parallel()
	db := pgtest.New(t)
	runs, _ := seedWorked(t, db, 1)
	mustRun(t, db.URL, "publish", adjustForTest(t, db.URL, fmt.Sprint(runs[0])), "--reason", "worked circuit, reviewed", "--yes")
	dir := t.TempDir()
	key := filepath.Join(dir, "office.key")
	mustRun(t, db.URL, "audit", "key", "new", key)
	stmt := mustRun(t, db.URL, "audit", "head", "--key", key)
	sfile := filepath.Join(dir, "s.json")
	if err := os.WriteFile(sfile, []byte(stmt), 0o644); err != nil {
		t.Fatal(err)
	}
	out, _, st := binRun(t, db.URL, "audit", "verify", "-o", "json")
	whole := auditDoc(t, out)
	if st != ExitOK || whole.Versions == 0 {
		t.Fatalf("whole audit of the demo: exit %d, %+v", st, whole)
	}

	// Nothing since: nothing to derive, the evidence still proven.
	out, errOut, st := binRun(t, db.URL, "audit", "verify", "--since", sfile, "-o", "json")
	doc := auditDoc(t, out)
	if st != ExitOK || !doc.Verified || doc.Evidence.Commits != 0 || doc.Versions != 0 || !strings.Contains(errOut, "signature verifies") {
		t.Fatalf("--since with nothing since: exit %d, %+v\n%s", st, doc, errOut)
	}

	// A run recorded, adjusted and published since the statement.
	run2 := registertest.On(t, db).WorkedCopy(t, 2, "tester")
	mustRun(t, db.URL, "publish", adjustForTest(t, db.URL, fmt.Sprint(run2)), "--reason", "second circuit, reviewed", "--yes")
	out, _, _ = binRun(t, db.URL, "audit", "verify", "-o", "json")
	whole = auditDoc(t, out)
	out, errOut, st = binRun(t, db.URL, "audit", "verify", "--since", sfile, "-o", "json")
	doc = auditDoc(t, out)
	// The chains the publication touched, not the held mark's, which it
	// did not.
	if st != ExitOK || !doc.Verified || doc.Evidence.Commits < 2 || doc.Versions == 0 || doc.Versions >= whole.Versions {
		t.Fatalf("--since after a publication: exit %d, %+v\n%s", st, doc, errOut)
	}
	var since struct {
		Runs        int `json:"runs"`
		Adjustments int `json:"adjustments"`
	}
	if err := json.Unmarshal([]byte(out), &since); err != nil || since.Runs != 1 || since.Adjustments != 1 {
		t.Errorf("--since derived %d runs and %d adjustments, want the 1 and 1 since (%v)", since.Runs, since.Adjustments, err)
	}

	// A version published since, edited: found by --since.
	asSuperuser(t, db, "UPDATE height SET reason = 'edited' WHERE id = (SELECT max(id) FROM height)")
	if out, errOut, st := binRun(t, db.URL, "audit", "verify", "--since", sfile); st != ExitChecks || !strings.Contains(out, "hash does not match") ||
		!strings.Contains(errOut, "table height: the rows changed since the commit") {
		t.Errorf("--since, a version of since edited: exit %d, %s%s", st, out, errOut)
	}
	asSuperuser(t, db, "UPDATE height SET reason = 'second circuit, reviewed' WHERE id = (SELECT max(id) FROM height)")

	// A mark of before the statement, edited: not seen by --since, found
	// by the whole audit.
	asSuperuser(t, db, "UPDATE mark SET setting = 'edited' WHERE id = (SELECT min(id) FROM mark)")
	if _, errOut, st := binRun(t, db.URL, "audit", "verify", "--since", sfile); st != ExitOK {
		t.Errorf("--since, a row of before edited: exit %d, want %d (not its to see): %s", st, ExitOK, errOut)
	}
	if _, errOut, st := binRun(t, db.URL, "audit", "verify"); st != ExitChecks || !strings.Contains(errOut, "table mark: the rows changed since the commit") {
		t.Errorf("whole audit, a row of before edited: exit %d, %s", st, errOut)
	}

	// The statement's own commit rewritten: --since refuses to start.
	var seq int64
	var s struct {
		Seq int64 `json:"seq"`
	}
	if err := json.Unmarshal([]byte(stmt), &s); err != nil {
		t.Fatal(err)
	}
	seq = s.Seq
	asSuperuser(t, db, fmt.Sprintf("ALTER TABLE register_commit DISABLE TRIGGER USER; UPDATE register_commit SET hash = sha256(hash) WHERE seq = %d; ALTER TABLE register_commit ENABLE TRIGGER USER", seq))
	if _, errOut, st := binRun(t, db.URL, "audit", "verify", "--since", sfile); st != ExitBadInput || !strings.Contains(errOut, "run the whole audit") {
		t.Errorf("--since, the statement's commit rewritten: exit %d, %s", st, errOut)
	}
	if _, errOut, st := binRun(t, db.URL, "audit", "verify", "--since", sfile, "--against", sfile); st != ExitBadInput || !strings.Contains(errOut, "give one") {
		t.Errorf("--since with --against: exit %d, %s", st, errOut)
	}
}
