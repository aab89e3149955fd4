package register

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"runtime"
	"strconv"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"golang.org/x/sync/errgroup"

	"cairn/internal/store"
)

// Canonical returns the text whose SHA-256 is the hash of version h, given
// the hash of the version it supersedes (nil for a first version). It is
// the same text the database's height_canonical builds (migrations/00001),
// written independently here so that the audit does not trust the
// database's own code. Each field is one line "name:length:value", the
// length in bytes, in this order:
//
//	cairn-height  1 (the version of this layout)
//	prev          the predecessor's hash in lower-case hex, or empty
//	mark          designation
//	datum         datum code
//	version       1, 2, 3, ...
//	value         as published (e.g. 769.83), empty for a withdrawal
//	unit          m, ft or usft, or empty
//	decimals      or empty
//	class
//	source_kind
//	source
//	adjustment_id or empty
//	reason
//	recorded_by
//	recorded_at   UTC, microseconds: 2006-01-02T15:04:05.000000Z
//
// A version written from schema v12 on, which has its login role, uses
// layout 2 (height_canonical_v2): "cairn-height" is 2 and one more line
// follows the others:
//
//	recorded_role the login role (session_user) that wrote it
//
// A version that gives the time it came in force (schema v17, from
// outside: InForceGiven not nil) uses layout 3: "cairn-height" is 3 and
// one more line follows those of layout 2:
//
//	in_force_from UTC, microseconds, as recorded_at
//
// A version without keeps layout 2 (or 1), whose meaning is "in force
// from its commit".
func Canonical(prevHash []byte, h store.Height) string {
	return string(AppendCanonical(nil, prevHash, &h))
}

// canonicalTime is the layout of the canonical text's times.
const canonicalTime = "2006-01-02T15:04:05.000000Z"

// AppendCanonical appends Canonical's text to b.
func AppendCanonical(b []byte, prevHash []byte, h *store.Height) []byte {
	r := store.ChainRow{ID: h.ID, MarkID: h.MarkID, DatumID: h.DatumID, Version: h.Version,
		Designation: []byte(h.Designation), DatumCode: h.DatumCode,
		Class: []byte(h.Class), SourceKind: []byte(h.SourceKind), Source: []byte(h.Source),
		Reason: []byte(h.Reason), RecordedBy: []byte(h.RecordedBy), RecordedAt: h.RecordedAt, Hash: h.Hash}
	if h.Value != nil {
		r.Value = []byte(*h.Value)
	}
	if h.Unit != nil {
		r.Unit = []byte(*h.Unit)
	}
	if h.Decimals != nil {
		r.Decimals, r.HasDecimals = *h.Decimals, true
	}
	if h.AdjustmentID != nil {
		r.AdjustmentID, r.HasAdjustment = *h.AdjustmentID, true
	}
	if h.RecordedRole != nil {
		r.RecordedRole = []byte(*h.RecordedRole)
	}
	if h.InForceGiven != nil {
		r.InForceGiven, r.HasInForce = *h.InForceGiven, true
	}
	return appendCanonicalRow(b, prevHash, &r)
}

// appendCanonicalRow appends the canonical text of version r to b,
// without fmt or a string per field: the audit builds one for every
// version, from the bytes the database sent.
func appendCanonicalRow(b []byte, prevHash []byte, r *store.ChainRow) []byte {
	var scratch [64]byte
	layout := "1"
	switch {
	case r.HasInForce:
		layout = "3"
	case r.RecordedRole != nil:
		layout = "2"
	}
	b = appendField(b, "cairn-height", layout)
	b = appendFieldBytes(b, "prev", hex.AppendEncode(scratch[:0], prevHash))
	b = appendFieldBytes(b, "mark", r.Designation)
	b = appendField(b, "datum", r.DatumCode)
	b = appendFieldBytes(b, "version", strconv.AppendInt(scratch[:0], int64(r.Version), 10))
	b = appendFieldBytes(b, "value", r.Value)
	b = appendFieldBytes(b, "unit", r.Unit)
	if r.HasDecimals {
		b = appendFieldBytes(b, "decimals", strconv.AppendInt(scratch[:0], int64(r.Decimals), 10))
	} else {
		b = appendField(b, "decimals", "")
	}
	b = appendFieldBytes(b, "class", r.Class)
	b = appendFieldBytes(b, "source_kind", r.SourceKind)
	b = appendFieldBytes(b, "source", r.Source)
	if r.HasAdjustment {
		b = appendFieldBytes(b, "adjustment_id", strconv.AppendInt(scratch[:0], r.AdjustmentID, 10))
	} else {
		b = appendField(b, "adjustment_id", "")
	}
	b = appendFieldBytes(b, "reason", r.Reason)
	b = appendFieldBytes(b, "recorded_by", r.RecordedBy)
	b = appendFieldBytes(b, "recorded_at", appendCanonicalTime(scratch[:0], r.RecordedAt))
	if r.RecordedRole != nil || r.HasInForce {
		b = appendFieldBytes(b, "recorded_role", r.RecordedRole)
	}
	if r.HasInForce {
		b = appendFieldBytes(b, "in_force_from", appendCanonicalTime(scratch[:0], r.InForceGiven))
	}
	return b
}

// appendCanonicalTime appends t in UTC in the layout canonicalTime, as
// time.Time.AppendFormat does, digit by digit: the layout is parsed
// again on every call of AppendFormat, a quarter of the Go side of the
// audit of the chains. Years outside 0 to 9999 are left to AppendFormat.
func appendCanonicalTime(b []byte, t time.Time) []byte {
	t = t.UTC()
	year, month, day := t.Date()
	if year < 0 || year > 9999 {
		return t.AppendFormat(b, canonicalTime)
	}
	hour, minute, sec := t.Clock()
	digits := func(b []byte, v, n int) []byte {
		var d [6]byte
		for i := n - 1; i >= 0; i-- {
			d[i] = byte('0' + v%10)
			v /= 10
		}
		return append(b, d[:n]...)
	}
	b = digits(b, year, 4)
	b = append(b, '-')
	b = digits(b, int(month), 2)
	b = append(b, '-')
	b = digits(b, day, 2)
	b = append(b, 'T')
	b = digits(b, hour, 2)
	b = append(b, ':')
	b = digits(b, minute, 2)
	b = append(b, ':')
	b = digits(b, sec, 2)
	b = append(b, '.')
	b = digits(b, t.Nanosecond()/1000, 6)
	return append(b, 'Z')
}

// appendField appends one line "name:length:value" (the length in bytes).
func appendField(b []byte, name, value string) []byte {
	b = append(b, name...)
	b = append(b, ':')
	b = strconv.AppendInt(b, int64(len(value)), 10)
	b = append(b, ':')
	b = append(b, value...)
	return append(b, '\n')
}

func appendFieldBytes(b []byte, name string, value []byte) []byte {
	b = append(b, name...)
	b = append(b, ':')
	b = strconv.AppendInt(b, int64(len(value)), 10)
	b = append(b, ':')
	b = append(b, value...)
	return append(b, '\n')
}

func deref(s *string) string {
	if s == nil {
		return ""
	}
	return *s
}

// Break is one fault found in a chain of versions.
type Break struct {
	Designation string `json:"mark"`
	Datum       string `json:"datum"`
	Version     int    `json:"version"`
	ID          int64  `json:"height_id"`
	Problem     string `json:"problem"`
	Expected    string `json:"expected,omitempty"` // hash recomputed, hex
	Stored      string `json:"stored,omitempty"`   // hash in the database, hex
}

// AuditReport is the result of AuditVerify.
type AuditReport struct {
	Chains   int     `json:"chains"`
	Versions int     `json:"versions"`
	Breaks   []Break `json:"breaks"`
	// Derived: what the audit derived again (audit_derive.go).
	Derived
}

// AuditVerify recomputes the hash chain of every mark and datum from the
// first version to the last and reports each break: a hash that does not
// match its recomputed value, a version that does not supersede the one
// before it, a gap in the version numbers, a time that does not follow
// its predecessor's, or an in-force time after the version was written
// (the premise of "in force now", store.heightCurrent: with it, exactly
// one version of a chain is in force at any time). The chains are
// divided by mark id among workers, one per CPU (at most 8), each in its
// own transaction on one snapshot exported by the first, so that they see
// the same register; the breaks are reported in chain order.
func (r *Register) AuditVerify(ctx context.Context) (AuditReport, error) {
	return r.AuditVerifyProgress(ctx, nil)
}

// AuditProgressStep is how many versions AuditVerifyProgress checks
// between two calls of its step.
const AuditProgressStep = 1000

// AuditVerifyProgress is AuditVerify calling step (unless nil) with the
// number of versions checked since its last call, every
// AuditProgressStep versions and at the end of the chains, for a
// progress bar.
func (r *Register) AuditVerifyProgress(ctx context.Context, step func(versions int)) (AuditReport, error) {
	return r.auditVerify(ctx, nil, step)
}

// AuditVerifySince is AuditVerifyProgress from a checkpoint, the commit of
// transaction xid (a statement's, whose signature the caller checked): it
// recomputes the chains with a version written after it, each whole,
// derives again the runs recorded and adjustments published after it, and
// checks the versions written after it that cite an adjustment; the
// schema is compared in full. A version, run or adjustment written before
// and changed since is the whole audit's to find.
func (r *Register) AuditVerifySince(ctx context.Context, xid uint64, step func(versions int)) (AuditReport, error) {
	return r.auditVerify(ctx, &xid, step)
}

func (r *Register) auditVerify(ctx context.Context, since *uint64, step func(versions int)) (AuditReport, error) {
	rep := AuditReport{Breaks: []Break{}}
	if step == nil {
		step = func(int) {}
	}
	var mu sync.Mutex
	safe := func(n int) { mu.Lock(); defer mu.Unlock(); step(n) }
	if err := r.auditChains(ctx, &rep, since, safe); err != nil {
		return rep, fmt.Errorf("read height versions: %w", err)
	}
	return rep, r.auditDerive(ctx, &rep, since)
}

// auditWorkers is how many transactions read the chains at once, and
// auditSpanPerWorker the fewest mark ids worth a worker of its own.
var (
	auditWorkers       = func() int { return min(max(runtime.GOMAXPROCS(0), 1), 8) }
	auditSpanPerWorker = int64(1000)
)

func (r *Register) auditChains(ctx context.Context, rep *AuditReport, since *uint64, step func(int)) error {
	lead, err := r.pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
	if err != nil {
		return err
	}
	defer lead.Rollback(ctx)
	session := func(ctx context.Context, tx pgx.Tx) error {
		if err := store.TxNoJIT(ctx, tx); err != nil {
			return err
		}
		if since == nil {
			return store.ChainSession(ctx, tx)
		}
		return nil
	}
	if err := session(ctx, lead); err != nil {
		return err
	}
	snapshot, err := store.SnapshotExport(ctx, lead)
	if err != nil {
		return err
	}
	lo, hi, err := store.HeightChainSpan(ctx, lead)
	if err != nil {
		return err
	}
	n := int64(auditWorkers())
	if hi-lo+1 < n*auditSpanPerWorker {
		n = max(1, (hi-lo+1)/auditSpanPerWorker) // a small register: fewer transactions are quicker
	}
	parts := make([]AuditReport, n)
	g, gctx := errgroup.WithContext(ctx)
	width := (hi - lo + n) / n
	for i := range n {
		from, to := lo+i*width, min(lo+(i+1)*width-1, hi)
		part := &parts[i]
		part.Breaks = []Break{}
		g.Go(func() error {
			if i == 0 {
				return auditChainRange(gctx, lead, from, to, since, part, step)
			}
			tx, err := r.pool.BeginTx(gctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
			if err != nil {
				return err
			}
			defer tx.Rollback(gctx)
			if err := store.SnapshotUse(gctx, tx, snapshot); err != nil {
				return fmt.Errorf("share the audit's snapshot: %w", err)
			}
			if err := session(gctx, tx); err != nil {
				return err
			}
			return auditChainRange(gctx, tx, from, to, since, part, step)
		})
	}
	if err := g.Wait(); err != nil {
		return err
	}
	for _, p := range parts {
		rep.Chains += p.Chains
		rep.Versions += p.Versions
		rep.Breaks = append(rep.Breaks, p.Breaks...)
	}
	return nil
}

// chainLink is what the check of a version keeps of the one before it.
type chainLink struct {
	id, markID, datumID int64
	version             int
	hash                []byte
	recordedAt          time.Time
}

// auditChainRange checks the chains of the marks with ids from lo to hi.
func auditChainRange(ctx context.Context, tx pgx.Tx, lo, hi int64, since *uint64, rep *AuditReport, step func(int)) error {
	var (
		prev    chainLink
		hasPrev bool
		buf     []byte
	)
	defer func() { step(rep.Versions % AuditProgressStep) }()
	return store.HeightChainRows(ctx, tx, lo, hi, since, func(h *store.ChainRow) error {
		rep.Versions++
		if rep.Versions%AuditProgressStep == 0 {
			step(AuditProgressStep)
		}
		if !hasPrev || prev.markID != h.MarkID || prev.datumID != h.DatumID {
			rep.Chains++
			hasPrev = false
		}
		brk := func(problem string) {
			rep.Breaks = append(rep.Breaks, Break{Designation: string(h.Designation), Datum: h.DatumCode, Version: h.Version, ID: h.ID, Problem: problem})
		}
		var prevHash []byte
		wantVersion := 1
		if hasPrev {
			prevHash, wantVersion = prev.hash, prev.version+1
		}
		if h.Version != wantVersion {
			brk(fmt.Sprintf("version number %d where %d was due", h.Version, wantVersion))
		}
		switch {
		case !hasPrev && h.HasSupersedes:
			brk(fmt.Sprintf("broken link: first version supersedes id %d", h.Supersedes))
		case hasPrev && (!h.HasSupersedes || h.Supersedes != prev.id):
			var sup *int64
			if h.HasSupersedes {
				sup = &h.Supersedes
			}
			brk(fmt.Sprintf("broken link: supersedes %s, not version %d (id %d)", idText(sup), prev.version, prev.id))
		}
		if hasPrev && !h.RecordedAt.After(prev.recordedAt) {
			brk("recorded at or before the version it supersedes")
		}
		if h.HasInForce && h.InForceGiven.After(h.RecordedAt) {
			brk("in force from a time after it was written (" + h.InForceGiven.UTC().Format(canonicalTime) + ")")
		}
		switch {
		case h.NoMark:
			// Which mark it was is gone with the mark's row: its hash
			// cannot be recomputed.
			brk(fmt.Sprintf("its mark (id %d) is not in the mark table: removed behind the register's back", h.MarkID))
		default:
			buf = appendCanonicalRow(buf[:0], prevHash, h)
			if sum := sha256.Sum256(buf); !bytes.Equal(sum[:], h.Hash) {
				rep.Breaks = append(rep.Breaks, Break{Designation: string(h.Designation), Datum: h.DatumCode, Version: h.Version, ID: h.ID,
					Problem: "hash does not match the version's contents", Expected: hex.EncodeToString(sum[:]), Stored: hex.EncodeToString(h.Hash)})
			}
		}
		prev = chainLink{id: h.ID, markID: h.MarkID, datumID: h.DatumID, version: h.Version,
			hash: append(prev.hash[:0], h.Hash...), recordedAt: h.RecordedAt}
		hasPrev = true
		return nil
	})
}

func idText(id *int64) string {
	if id == nil {
		return "nothing"
	}
	return "id " + strconv.FormatInt(*id, 10)
}
