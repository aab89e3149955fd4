package cli

import (
	"context"
	"fmt"
	"os"
	"strconv"
	"sync"

	"github.com/spf13/cobra"

	"cairn/internal/register"
)

// auditHeadOptions are the inputs of `cairn audit head`.
type auditHeadOptions struct {
	f   *Factory
	ctx context.Context
	key string
}

func newCmdAuditHead(f *Factory, runF func(*auditHeadOptions) error) *cobra.Command {
	opts := &auditHeadOptions{f: f}
	cmd := &cobra.Command{
		Use:   "head",
		Short: "Print a statement of the register's state, signed when a key is given",
		Long: `Verify the whole commit chain and print a statement of its head: the
register's database and cluster, the last commit's seq and hash, the rows of
each table, the latest commit time and cairn's version, as JSON. With --key
FILE (or CAIRN_AUDIT_KEY naming the file), the statement is signed with the
office's Ed25519 key and carries its public key. Keep statements outside the
database (docs/reliability.md, "Statements"): "cairn audit verify --against
FILE" later proves that nothing recorded before it was changed, removed or
reordered. A register whose chain does not verify gets no statement (exit 3).`,
		Example: `  cairn audit head --key /etc/cairn/office.key > statement-2024-05-14.json`,
		Args:    exactArgs(0, "no arguments"),
		RunE:    runE(&opts.ctx, opts, runF, auditHeadRun),
	}
	cmd.Flags().StringVar(&opts.key, "key", "", "sign with the Ed25519 key in FILE (default: the file CAIRN_AUDIT_KEY names)")
	return cmd
}

func auditHeadRun(opts *auditHeadOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	s, err := makeStatement(opts.ctx, r, opts.key, opts.f)
	if err != nil {
		return err
	}
	_, err = opts.f.IO.Out.Write(s.Encode())
	return err
}

// makeStatement makes a statement of r's head, signed with the key in
// file, or in the file CAIRN_AUDIT_KEY names when file is empty.
func makeStatement(ctx context.Context, r *register.Register, file string, f *Factory) (register.Statement, error) {
	if file == "" {
		file = os.Getenv("CAIRN_AUDIT_KEY")
	}
	var key []byte
	if file != "" {
		k, err := register.ReadStatementKey(file)
		if err != nil {
			return register.Statement{}, badInput("signing key: %v", err)
		}
		key = k
	}
	s, rep, err := r.MakeStatement(ctx, Version, key)
	if err != nil {
		return s, err
	}
	if len(rep.Breaks) > 0 {
		printEvidenceBreaks(f, rep)
		return s, checksFailed{len(rep.Breaks)}
	}
	return s, nil
}

func printEvidenceBreaks(f *Factory, rep register.EvidenceReport) {
	for _, b := range rep.Breaks {
		where := "commit " + strconv.FormatInt(b.Seq, 10)
		if b.Seq < 0 {
			where = "no commit"
		}
		if b.Xid != 0 {
			where += fmt.Sprintf(" (transaction %d", b.Xid)
			if !b.CommittedAt.IsZero() {
				where += ", committed " + b.CommittedAt.UTC().Format("2006-01-02 15:04:05.000000Z")
			}
			where += ")"
		}
		if b.Table != "" {
			where += ", table " + b.Table
		}
		fmt.Fprintf(f.IO.ErrOut, "evidence: %s: %s\n", where, b.Problem)
	}
}

// auditKeyOptions are the inputs of `cairn audit key new`.
type auditKeyOptions struct {
	f    *Factory
	ctx  context.Context
	file string
}

func newCmdAuditKeyNew(f *Factory, runF func(*auditKeyOptions) error) *cobra.Command {
	opts := &auditKeyOptions{f: f}
	return &cobra.Command{
		Use:   "new FILE",
		Short: "Make a new Ed25519 key for signing statements",
		Long: `Write a new Ed25519 private key to FILE (PEM, PKCS #8, mode 0600; FILE must
not exist) and print its public key in hex. Keep FILE outside the database and
its backups; give the public key to whoever checks the statements.`,
		Example: `  cairn audit key new /etc/cairn/office.key`,
		Args:    exactArgs(1, "a FILE to write"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.file = cmd.Context(), args[0]
			return dispatch(opts, runF, auditKeyNewRun)
		},
	}
}

func auditKeyNewRun(opts *auditKeyOptions) error {
	pub, err := register.NewStatementKey(opts.file)
	if err != nil {
		return badInput("key file %s: %v", opts.file, err)
	}
	opts.f.IO.printf("public key %s\n", pub)
	return nil
}

// statementCheck is what became of the statement audit verify was given:
// its file, whether it was signed and by which key, or why it was refused.
type statementCheck struct {
	File      string `json:"file"`
	Signed    bool   `json:"signed"`
	PublicKey string `json:"public_key,omitempty"`
	Refused   string `json:"refused,omitempty"`
}

// verifyAgainst checks the evidence chain, and against the statement in
// file when not empty; it prints what it found and returns checksFailed
// when anything does not hold. The statement's check is nil without one.
func verifyAgainst(ctx context.Context, f *Factory, r *register.Register, file, pub string) (register.EvidenceReport, *statementCheck, error) {
	return verifyEvidence(ctx, f, r, file, pub, nil, nil)
}

// readSince reads the statement an incremental audit starts from, its
// signature checked when it has one (and required with pub).
func readSince(f *Factory, file, pub string) (register.Statement, *statementCheck, error) {
	data, err := os.ReadFile(file)
	if err != nil {
		return register.Statement{}, nil, badInput("--since: %v", err)
	}
	s, signed, err := register.ParseStatement(data, pub)
	if err != nil {
		return register.Statement{}, nil, badInput("--since %s: %v", file, err)
	}
	check := &statementCheck{File: file, Signed: signed}
	if signed {
		check.PublicKey = s.PublicKey
		f.IO.printf("statement %s: signed by %s, signature verifies\n", file, s.PublicKey)
	} else {
		f.IO.printf("statement %s: not signed: the audit since it trusts the file as it is\n", file)
	}
	return s, check, nil
}

// verifyEvidence is verifyAgainst, or with since the evidence from that
// checkpoint on (EvidenceVerifySince), whose result sinceResult gives
// when not nil (computed meanwhile, sinceEvidence).
func verifyEvidence(ctx context.Context, f *Factory, r *register.Register, file, pub string, since *register.Statement,
	sinceResult func() (register.EvidenceReport, error)) (register.EvidenceReport, *statementCheck, error) {
	if since != nil {
		if sinceResult == nil {
			sinceResult = func() (register.EvidenceReport, error) { return r.EvidenceVerifySince(ctx, *since) }
		}
		rep, err := sinceResult()
		if err != nil {
			return rep, nil, err
		}
		if len(rep.Breaks) > 0 {
			printEvidenceBreaks(f, rep)
			f.IO.printf("evidence: %d break(s) in %d commit(s) since the statement's seq %d\n", len(rep.Breaks), rep.Commits, since.Seq)
			return rep, nil, checksFailed{len(rep.Breaks)}
		}
		f.IO.printf("evidence: %d commit(s) since the statement's seq %d (made %s) verify, head seq %d %s; the commits before it are taken from the statement (the whole audit, without --since, recomputes them)\n",
			rep.Commits, since.Seq, since.MadeAt.UTC().Format("2006-01-02 15:04:05Z"), rep.Seq, rep.Head)
		return rep, nil, nil
	}
	var stmt *register.Statement
	var check *statementCheck
	if file != "" {
		data, err := os.ReadFile(file)
		if err != nil {
			return register.EvidenceReport{}, nil, badInput("statement: %v", err)
		}
		check = &statementCheck{File: file}
		s, signed, err := register.ParseStatement(data, pub)
		if err != nil {
			f.IO.printf("statement %s: %v\n", file, err)
			check.Refused = err.Error()
			return register.EvidenceReport{Rows: map[string]int64{}, Breaks: []register.EvidenceBreak{}}, check, checksFailed{1}
		}
		if signed {
			f.IO.printf("statement %s: signed by %s, signature verifies\n", file, s.PublicKey)
			check.Signed, check.PublicKey = true, s.PublicKey
		} else {
			f.IO.printf("statement %s: not signed\n", file)
		}
		stmt = &s
	}
	rep, err := r.EvidenceVerify(ctx, stmt)
	if err != nil {
		return rep, check, err
	}
	if len(rep.Breaks) > 0 {
		printEvidenceBreaks(f, rep)
		f.IO.printf("evidence: %d break(s) in %d commit(s)\n", len(rep.Breaks), rep.Commits)
		return rep, check, checksFailed{len(rep.Breaks)}
	}
	f.IO.printf("evidence: %d commit(s) verify, head seq %d %s\n", rep.Commits, rep.Seq, rep.Head)
	if stmt != nil {
		f.IO.printf("evidence: everything up to the statement's seq %d (made %s) is unchanged, and the register only grew since\n",
			stmt.Seq, stmt.MadeAt.UTC().Format("2006-01-02 15:04:05Z"))
	}
	return rep, check, nil
}

// sinceEvidence starts the evidence from checkpoint since
// (EvidenceVerifySince) at once, to run while the chains are audited (the
// two read apart and share nothing but the server's cores), and returns
// the function that waits for its result; call it on every path, so that
// nothing reads the register after the command ends.
func sinceEvidence(ctx context.Context, r *register.Register, since register.Statement) func() (register.EvidenceReport, error) {
	type result struct {
		rep register.EvidenceReport
		err error
	}
	ch := make(chan result, 1)
	go func() {
		rep, err := r.EvidenceVerifySince(ctx, since)
		ch <- result{rep, err}
	}()
	return sync.OnceValues(func() (register.EvidenceReport, error) {
		res := <-ch
		return res.rep, res.err
	})
}
