package register

import (
	"bytes"
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"crypto/x509"
	"encoding/hex"
	"encoding/json"
	"encoding/pem"
	"errors"
	"fmt"
	"hash"
	"os"
	"sort"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"github.com/jackc/pgx/v5"
	"golang.org/x/sync/errgroup"

	"cairn/internal/store"
)

// CommitText is the canonical text whose SHA-256 is a commit's hash
// (docs/reliability.md, "The evidence"), as the database's
// cairn_commit_text builds it (migrations/00013), written again here.
func CommitText(prev []byte, seq int64, xid uint64, at time.Time, login string, digest []byte) string {
	return "cairn-commit:1\n" +
		"prev:" + hex.EncodeToString(prev) + "\n" +
		"seq:" + strconv.FormatInt(seq, 10) + "\n" +
		"xid:" + strconv.FormatUint(xid, 10) + "\n" +
		"committed_at:" + at.UTC().Format("2006-01-02T15:04:05.000000Z") + "\n" +
		"login:" + strconv.Itoa(len(login)) + ":" + login + "\n" +
		"digest:" + hex.EncodeToString(digest) + "\n"
}

// EvidenceBreak is one fault found in the commit chain.
type EvidenceBreak struct {
	Seq         int64     `json:"commit_seq"`
	Xid         uint64    `json:"xid"`
	CommittedAt time.Time `json:"committed_at,omitzero"`
	Table       string    `json:"table,omitempty"`
	Problem     string    `json:"problem"`
}

// EvidenceReport is the result of EvidenceVerify.
type EvidenceReport struct {
	Commits      int64            `json:"commits"`
	Rows         map[string]int64 `json:"rows"`
	Seq          int64            `json:"head_seq"`
	Head         string           `json:"head"`
	LatestCommit time.Time        `json:"latest_commit,omitzero"`
	Against      *int64           `json:"against_seq,omitempty"`
	Breaks       []EvidenceBreak  `json:"breaks"`
}

// tableSum hashes the rows one commit wrote to one table as
// cairn_commit_manifest does (migrations/00022): in key order, each row's
// canonical text and a newline; whole, or cut into pieces of piece rows
// whose digests are hashed in turn.
type tableSum struct {
	piece  int64     // rows in a piece; 0: all the rows are one piece
	rows   int64     // rows added
	h      hash.Hash // the piece being hashed
	pieces []byte    // the 32-byte digests of the pieces done
}

func newTableSum(piece int64) *tableSum { return &tableSum{piece: piece, h: sha256.New()} }

func (s *tableSum) add(text []byte) {
	s.h.Write(text)
	s.h.Write([]byte{'\n'})
	s.rows++
	if s.piece > 0 && s.rows%s.piece == 0 {
		s.pieces = s.h.Sum(s.pieces)
		s.h.Reset()
	}
}

// line is the table's line of the manifest without the table's name:
// "rows sha256" for at most one piece, "rows pieces-of K sha256" for more.
func (s *tableSum) line() string {
	pieces := s.pieces
	if s.piece == 0 || s.rows%s.piece != 0 {
		pieces = s.h.Sum(pieces)
	}
	if len(pieces) == sha256.Size {
		return strconv.FormatInt(s.rows, 10) + " " + hex.EncodeToString(pieces)
	}
	d := sha256.Sum256(pieces)
	return strconv.FormatInt(s.rows, 10) + " pieces-of " + strconv.FormatInt(s.piece, 10) + " " + hex.EncodeToString(d[:])
}

// manifestPiece is the piece size a stored manifest line names ("rows
// pieces-of K sha256"), or 0 for a line of one piece (and for no line).
func manifestPiece(line string) int64 {
	f := strings.Fields(line)
	if len(f) == 4 && f[1] == "pieces-of" {
		if k, err := strconv.ParseInt(f[2], 10, 64); err == nil && k > 0 {
			return k
		}
	}
	return 0
}

// EvidenceVerify recomputes, from the rows by plain SELECTs in one
// snapshot, the manifest and digest of every commit, seq by seq, and the
// chain of hashes, and reports: a commit whose rows no longer match its
// manifest (naming the table), a manifest that does not match its digest,
// a broken link (a commit removed, reordered or rewritten), a time out of
// order, and rows no commit covers. With against, it also proves that the
// chain recomputed up to the statement's seq ends at the statement's
// head, with the statement's counts. Linear in rows and commits; one page
// of commits and one row at a time in memory.
func (r *Register) EvidenceVerify(ctx context.Context, against *Statement) (EvidenceReport, error) {
	return r.evidenceVerify(ctx, nil, against)
}

// EvidenceVerifySince is EvidenceVerify from a checkpoint: it trusts the
// chain up to the statement since (whose signature the caller checked),
// proves that the stored commit at the statement's seq still has the
// statement's hash, and recomputes only the commits after it, and looks
// for uncovered rows only among the rows of later transactions. What it
// cannot see is a row of a commit before the statement changed since:
// that is the whole audit's to find (docs/reliability.md).
func (r *Register) EvidenceVerifySince(ctx context.Context, since Statement) (EvidenceReport, error) {
	return r.evidenceVerify(ctx, &since, nil)
}

// StatementXid returns the transaction of the commit a statement names
// (its seq), for AuditVerifySince; an InputError if the register has no
// such commit or its stored hash is not the statement's (then only the
// whole audit can say what changed).
func (r *Register) StatementXid(ctx context.Context, s Statement) (uint64, error) {
	var xid uint64
	err := r.withTx(ctx, readTx, func(tx pgx.Tx) error {
		c, err := store.EvidenceCommitAt(ctx, tx, s.Seq)
		if errors.Is(err, store.ErrNotFound) {
			return inputErr("since", "the register has no commit seq %d, which the statement names: run the whole audit (without --since)", s.Seq)
		}
		if err != nil {
			return err
		}
		if hex.EncodeToString(c.Hash) != s.Head {
			return inputErr("since", "the register's commit seq %d has hash %x, not the statement's %s: the chain up to the statement was rewritten; run the whole audit (without --since)", s.Seq, c.Hash, s.Head)
		}
		xid = c.Xid
		return nil
	})
	return xid, err
}

func (r *Register) evidenceVerify(ctx context.Context, since, against *Statement) (EvidenceReport, error) {
	rep := EvidenceReport{Rows: map[string]int64{}, Breaks: []EvidenceBreak{}}
	tx, err := r.pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
	if err != nil {
		return rep, fmt.Errorf("begin the audit: %w", err)
	}
	defer tx.Rollback(ctx)
	if err := store.EvidenceSession(ctx, tx); err != nil {
		return rep, err
	}
	peer := &evidencePeer{r: r, lead: tx}
	defer peer.close(ctx)
	var (
		storedPrev []byte // the stored hash of the previous commit
		recPrev    []byte // the recomputed hash of the previous commit
		prevSeq    int64  = -1
		prevAt     time.Time
		seen       bool
		atStmt     bool
		sinceXid   *uint64
	)
	var stmtRows map[string]int64
	after := int64(-1)
	if since != nil {
		head, err := hex.DecodeString(since.Head)
		if err != nil {
			return rep, fmt.Errorf("the statement's head %q: %w", since.Head, err)
		}
		c, err := store.EvidenceCommitAt(ctx, tx, since.Seq)
		switch {
		case errors.Is(err, store.ErrNotFound):
			rep.Breaks = append(rep.Breaks, EvidenceBreak{Seq: since.Seq, Problem: fmt.Sprintf("the register's chain has no commit seq %d, which the statement (made %s) names: the register did not only grow since",
				since.Seq, since.MadeAt.UTC().Format(time.RFC3339))})
			return rep, nil
		case err != nil:
			return rep, err
		}
		if !bytes.Equal(c.Hash, head) {
			rep.Breaks = append(rep.Breaks, EvidenceBreak{Seq: c.Seq, Xid: c.Xid, CommittedAt: c.CommittedAt, Problem: fmt.Sprintf(
				"the stored hash of commit seq %d is %x, not the statement's %s: the chain up to the statement was rewritten", c.Seq, c.Hash, since.Head)})
		}
		storedPrev, recPrev, prevSeq, prevAt, seen, after = c.Hash, head, c.Seq, c.CommittedAt, true, c.Seq
		x := c.Xid
		sinceXid = &x
		rep.Seq, rep.Head, rep.LatestCommit = c.Seq, since.Head, c.CommittedAt
	}
	for {
		page, err := store.EvidenceCommitPage(ctx, tx, after, 1000)
		if err != nil {
			return rep, err
		}
		if len(page) == 0 {
			break
		}
		for _, c := range page {
			after = c.Seq
			rep.Commits++
			brk := func(table, problem string) {
				rep.Breaks = append(rep.Breaks, EvidenceBreak{Seq: c.Seq, Xid: c.Xid, CommittedAt: c.CommittedAt, Table: table, Problem: problem})
			}
			// The link.
			switch {
			case !seen && c.Seq != 0 && c.Seq != 1:
				brk("", fmt.Sprintf("broken link: the first commit is seq %d, not 0 or 1: commits before it were removed", c.Seq))
			case seen && c.Seq != prevSeq+1:
				brk("", fmt.Sprintf("broken link: seq %d follows seq %d: %d commit(s) removed", c.Seq, prevSeq, c.Seq-prevSeq-1))
			}
			if seen && !c.CommittedAt.After(prevAt) {
				brk("", "committed at or before the commit before it: commits reordered")
			}
			if want := sha256.Sum256([]byte(CommitText(storedPrev, c.Seq, c.Xid, c.CommittedAt, c.Login, c.Digest))); !bytes.Equal(want[:], c.Hash) {
				brk("", "broken link: the stored hash does not follow from the commit before it and this commit's digest (a commit removed, reordered or rewritten)")
			}
			if d := sha256.Sum256([]byte(c.Manifest)); !bytes.Equal(d[:], c.Digest) {
				brk("", "the manifest does not match the digest")
			}
			// The rows, each table hashed in the form its stored line
			// names: a line rewritten to another form breaks the digest.
			stored := map[string]string{}
			for _, l := range strings.Split(strings.TrimSuffix(c.Manifest, "\n"), "\n") {
				if t, rest, ok := strings.Cut(l, " "); ok {
					stored[t] = rest
				}
			}
			sums, err := peer.commitSums(ctx, c, stored)
			if err != nil {
				return rep, err
			}
			var order []string
			for _, t := range store.EvidenceTables {
				if sums[t.Name] != nil {
					order = append(order, t.Name)
				}
			}
			var man strings.Builder
			got := map[string]string{}
			for _, t := range order {
				line := sums[t].line()
				got[t] = line
				fmt.Fprintf(&man, "%s %s\n", t, line)
				rep.Rows[t] += sums[t].rows
			}
			for _, t := range store.EvidenceTables {
				g, s := got[t.Name], stored[t.Name]
				switch {
				case g == s:
				case s == "":
					brk(t.Name, fmt.Sprintf("%s row(s) that the commit did not write (added since)", strings.Fields(g)[0]))
				case g == "":
					brk(t.Name, fmt.Sprintf("the commit wrote %s row(s); none is left (removed since)", strings.Fields(s)[0]))
				default:
					brk(t.Name, fmt.Sprintf("the rows changed since the commit: it wrote %s row(s), there are %s, and they no longer hash to what it recorded",
						strings.Fields(s)[0], strings.Fields(g)[0]))
				}
			}
			recDigest := sha256.Sum256([]byte(man.String()))
			rec := sha256.Sum256([]byte(CommitText(recPrev, c.Seq, c.Xid, c.CommittedAt, c.Login, recDigest[:])))
			recPrev, storedPrev = rec[:], c.Hash
			prevSeq, prevAt, seen = c.Seq, c.CommittedAt, true
			rep.Seq, rep.Head, rep.LatestCommit = c.Seq, hex.EncodeToString(rec[:]), c.CommittedAt
			if against != nil && c.Seq == against.Seq {
				atStmt = true
				stmtRows = map[string]int64{}
				for k, v := range rep.Rows {
					stmtRows[k] = v
				}
				if rep.Head != against.Head {
					brk("", fmt.Sprintf("the register recomputed up to the statement's seq %d (made %s) ends at hash %s, not the statement's %s: something recorded before the statement was changed, removed or reordered",
						against.Seq, against.MadeAt.UTC().Format(time.RFC3339), rep.Head, against.Head))
				}
			}
		}
	}
	if against != nil {
		n := against.Seq
		rep.Against = &n
		switch {
		case !atStmt && against.Seq == 0 && rep.Commits == 0 && against.Head == "":
			// An empty register's statement, and still empty.
		case !atStmt:
			rep.Breaks = append(rep.Breaks, EvidenceBreak{Seq: against.Seq, Problem: fmt.Sprintf("the register's chain has no commit seq %d, which the statement (made %s) names: the register did not only grow since",
				against.Seq, against.MadeAt.UTC().Format(time.RFC3339))})
		default:
			var diff []string
			for _, t := range store.EvidenceTables {
				if stmtRows[t.Name] != against.Rows[t.Name] {
					diff = append(diff, fmt.Sprintf("%s %d, statement %d", t.Name, stmtRows[t.Name], against.Rows[t.Name]))
				}
			}
			if len(diff) > 0 {
				rep.Breaks = append(rep.Breaks, EvidenceBreak{Seq: against.Seq, Problem: "rows up to the statement's seq: " + strings.Join(diff, "; ")})
			}
		}
	}
	unc, err := store.EvidenceUncoveredRows(ctx, tx, sinceXid)
	if err != nil {
		return rep, err
	}
	for _, u := range unc {
		b := EvidenceBreak{Table: u.Table, Seq: -1}
		if u.Xid == nil {
			b.Problem = fmt.Sprintf("%d row(s) with no transaction, and no genesis entry covers them (added behind the register's back)", u.Rows)
		} else {
			b.Xid = *u.Xid
			b.Problem = fmt.Sprintf("%d row(s) of transaction %d, which no commit covers (added behind the register's back, or its commit removed)", u.Rows, *u.Xid)
		}
		rep.Breaks = append(rep.Breaks, b)
	}
	return rep, nil
}

// evidenceSplitRows is the fewest rows a commit's stored manifest names
// for its tables to be read on two transactions at once (the tables
// shared out between them by their stored counts): below it, the second
// transaction's round trips cost more than it gains.
var evidenceSplitRows int64 = 20000

// evidenceSplits counts the commits read on two transactions (for tests).
var evidenceSplits atomic.Int64

// evidencePeer reads a large commit's tables on two transactions at once:
// the audit's own (lead) and a second one on the lead's snapshot, begun
// the first time a commit is large enough (evidenceSplitRows) and the
// machine has more than one CPU.
type evidencePeer struct {
	r    *Register
	lead pgx.Tx
	tx   pgx.Tx
}

// second returns the second transaction, begun on the lead's snapshot.
func (p *evidencePeer) second(ctx context.Context) (pgx.Tx, error) {
	if p.tx != nil {
		return p.tx, nil
	}
	snap, err := store.SnapshotExport(ctx, p.lead)
	if err != nil {
		return nil, fmt.Errorf("share the audit's snapshot: %w", err)
	}
	tx, err := p.r.pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
	if err != nil {
		return nil, fmt.Errorf("begin the audit's second transaction: %w", err)
	}
	if err := store.SnapshotUse(ctx, tx, snap); err != nil {
		tx.Rollback(ctx)
		return nil, fmt.Errorf("share the audit's snapshot: %w", err)
	}
	if err := store.EvidenceSession(ctx, tx); err != nil {
		tx.Rollback(ctx)
		return nil, err
	}
	p.tx = tx
	return tx, nil
}

func (p *evidencePeer) close(ctx context.Context) {
	if p.tx != nil {
		p.tx.Rollback(context.WithoutCancel(ctx))
	}
}

// commitSums hashes the rows commit c wrote, table by table, each in the
// form its stored line names (stored, by table): a line rewritten to
// another form breaks the digest. Every table of the evidence is read,
// whether its line names rows or not (rows added since are found so);
// each table's sum is its own, so the tables of a large commit are shared
// out between the lead and the second transaction, read at once, the
// larger tables first to the one with fewer rows so far.
func (p *evidencePeer) commitSums(ctx context.Context, c store.EvidenceCommit, stored map[string]string) (map[string]*tableSum, error) {
	genesis := c.Seq == 0 && c.Xid == 0
	read := func(tx pgx.Tx, tables []store.EvidenceTable, sums map[string]*tableSum) error {
		return store.EvidenceRowsOf(ctx, tx, tables, c.Xid, genesis, func(table string, text []byte) error {
			if text == nil {
				return nil
			}
			s := sums[table]
			if s == nil {
				s = newTableSum(manifestPiece(stored[table]))
				sums[table] = s
			}
			s.add(text)
			return nil
		})
	}
	counts := make([]int64, len(store.EvidenceTables))
	var total int64
	for i, t := range store.EvidenceTables {
		if f := strings.Fields(stored[t.Name]); len(f) > 0 {
			counts[i], _ = strconv.ParseInt(f[0], 10, 64)
			total += max(counts[i], 0)
		}
	}
	sums := map[string]*tableSum{}
	if total < evidenceSplitRows || auditWorkers() < 2 {
		return sums, read(p.lead, store.EvidenceTables, sums)
	}
	second, err := p.second(ctx)
	if err != nil {
		return nil, err
	}
	evidenceSplits.Add(1)
	byRows := make([]int, len(counts))
	for i := range byRows {
		byRows[i] = i
	}
	sort.SliceStable(byRows, func(a, b int) bool { return counts[byRows[a]] > counts[byRows[b]] })
	var load [2]int64
	part := make([]int, len(counts))
	for _, i := range byRows {
		k := 0
		if load[1] < load[0] {
			k = 1
		}
		part[i] = k
		load[k] += counts[i]
	}
	var tables [2][]store.EvidenceTable
	for i, t := range store.EvidenceTables {
		tables[part[i]] = append(tables[part[i]], t)
	}
	other := map[string]*tableSum{}
	g, _ := errgroup.WithContext(ctx)
	g.Go(func() error { return read(second, tables[1], other) })
	err = read(p.lead, tables[0], sums)
	if werr := g.Wait(); err == nil {
		err = werr
	}
	for t, s := range other {
		sums[t] = s
	}
	return sums, err
}

// Statement is a small, signed account of the register's state: what an
// office keeps outside the database (docs/reliability.md, "Statements").
type Statement struct {
	Format       string           `json:"format"` // "cairn-statement 1"
	Database     string           `json:"database"`
	SystemID     string           `json:"system_identifier"`
	Seq          int64            `json:"seq"`
	Head         string           `json:"head"`
	Rows         map[string]int64 `json:"rows"`
	LatestCommit time.Time        `json:"latest_commit"`
	MadeAt       time.Time        `json:"made_at"`
	Cairn        string           `json:"cairn_version"`
	PublicKey    string           `json:"public_key,omitempty"` // Ed25519, hex
	Signature    string           `json:"signature,omitempty"`  // Ed25519 over SignedBytes, hex
}

const statementFormat = "cairn-statement 1"

// SignedBytes is what the signature covers: the statement's canonical
// JSON without its signature.
func (s Statement) SignedBytes() []byte {
	s.Signature = ""
	b, _ := json.Marshal(s)
	return b
}

// Encode is the statement's file: its canonical JSON, indented, and a
// newline. A file that is not exactly this for what it says is refused
// by ParseStatement, so no byte of it may change unnoticed.
func (s Statement) Encode() []byte {
	b, _ := json.MarshalIndent(s, "", "  ")
	return append(b, '\n')
}

// ParseStatement reads a statement's file and checks its signature, with
// pub when given (hex), else with the key it carries. signed says whether
// it was signed.
func ParseStatement(data []byte, pub string) (s Statement, signed bool, err error) {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&s); err != nil {
		return s, false, fmt.Errorf("not a cairn statement: %v", err)
	}
	if s.Format != statementFormat {
		return s, false, fmt.Errorf("format %q, not %q", s.Format, statementFormat)
	}
	if !bytes.Equal(s.Encode(), data) {
		return s, false, errors.New("not in the form cairn writes (changed since it was made?)")
	}
	if pub == "" {
		pub = s.PublicKey
	} else if s.PublicKey != "" && !strings.EqualFold(pub, s.PublicKey) {
		return s, false, fmt.Errorf("signed with key %s, not the key given %s", s.PublicKey, pub)
	}
	if s.Signature == "" {
		if pub != "" {
			return s, false, errors.New("not signed, though a public key was given")
		}
		return s, false, nil
	}
	key, err := hex.DecodeString(pub)
	if err != nil || len(key) != ed25519.PublicKeySize {
		return s, false, fmt.Errorf("public key %q is not %d bytes of hex", pub, ed25519.PublicKeySize)
	}
	sig, err := hex.DecodeString(s.Signature)
	if err != nil || !ed25519.Verify(ed25519.PublicKey(key), s.SignedBytes(), sig) {
		return s, false, errors.New("the signature does not verify: the statement was changed, or signed with another key")
	}
	return s, true, nil
}

// MakeStatement verifies the whole chain and, when it holds, returns a
// statement of its head, signed with key when not nil. A register whose
// chain does not verify gets no statement.
func (r *Register) MakeStatement(ctx context.Context, version string, key ed25519.PrivateKey) (Statement, EvidenceReport, error) {
	rep, err := r.EvidenceVerify(ctx, nil)
	if err != nil {
		return Statement{}, rep, err
	}
	if len(rep.Breaks) > 0 {
		return Statement{}, rep, nil
	}
	db, sys, err := store.RegisterIdentity(ctx, r.pool)
	if err != nil {
		return Statement{}, rep, err
	}
	now, err := store.ServerClock(ctx, r.pool)
	if err != nil {
		return Statement{}, rep, err
	}
	s := Statement{Format: statementFormat, Database: db, SystemID: sys, Seq: rep.Seq, Head: rep.Head, Rows: map[string]int64{},
		LatestCommit: rep.LatestCommit.UTC(), MadeAt: now.UTC().Truncate(time.Microsecond), Cairn: version}
	keys := make([]string, 0, len(rep.Rows))
	for k := range rep.Rows {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		s.Rows[k] = rep.Rows[k]
	}
	if key != nil {
		s.PublicKey = hex.EncodeToString(key.Public().(ed25519.PublicKey))
		s.Signature = hex.EncodeToString(ed25519.Sign(key, s.SignedBytes()))
	}
	return s, rep, nil
}

// NewStatementKey writes a new Ed25519 private key to file (PEM, PKCS #8,
// mode 0600; the file must not exist) and returns its public key in hex.
func NewStatementKey(file string) (string, error) {
	pub, priv, err := ed25519.GenerateKey(nil)
	if err != nil {
		return "", err
	}
	der, err := x509.MarshalPKCS8PrivateKey(priv)
	if err != nil {
		return "", err
	}
	f, err := os.OpenFile(file, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o600)
	if err != nil {
		return "", err
	}
	if err := pem.Encode(f, &pem.Block{Type: "PRIVATE KEY", Bytes: der}); err != nil {
		f.Close()
		os.Remove(file)
		return "", err
	}
	if err := f.Close(); err != nil {
		os.Remove(file)
		return "", err
	}
	return hex.EncodeToString(pub), nil
}

// ReadStatementKey reads a key file NewStatementKey wrote.
func ReadStatementKey(file string) (ed25519.PrivateKey, error) {
	data, err := os.ReadFile(file)
	if err != nil {
		return nil, err
	}
	blk, _ := pem.Decode(data)
	if blk == nil || blk.Type != "PRIVATE KEY" {
		return nil, fmt.Errorf("%s: not a PEM \"PRIVATE KEY\" block", file)
	}
	k, err := x509.ParsePKCS8PrivateKey(blk.Bytes)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	priv, ok := k.(ed25519.PrivateKey)
	if !ok {
		return nil, fmt.Errorf("%s: not an Ed25519 key", file)
	}
	return priv, nil
}
