package register

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"strconv"
	"strings"

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
	opt := func(s *string) string {
		if s == nil {
			return ""
		}
		return *s
	}
	dec, adj := "", ""
	if h.Decimals != nil {
		dec = strconv.Itoa(*h.Decimals)
	}
	if h.AdjustmentID != nil {
		adj = strconv.FormatInt(*h.AdjustmentID, 10)
	}
	layout := "1"
	switch {
	case h.InForceGiven != nil:
		layout = "3"
	case h.RecordedRole != nil:
		layout = "2"
	}
	fields := [][2]string{
		{"cairn-height", layout},
		{"prev", hex.EncodeToString(prevHash)},
		{"mark", h.Designation},
		{"datum", h.DatumCode},
		{"version", strconv.Itoa(h.Version)},
		{"value", opt(h.Value)},
		{"unit", opt(h.Unit)},
		{"decimals", dec},
		{"class", h.Class},
		{"source_kind", h.SourceKind},
		{"source", h.Source},
		{"adjustment_id", adj},
		{"reason", h.Reason},
		{"recorded_by", h.RecordedBy},
		{"recorded_at", h.RecordedAt.UTC().Format("2006-01-02T15:04:05.000000Z")},
	}
	if h.RecordedRole != nil || h.InForceGiven != nil {
		fields = append(fields, [2]string{"recorded_role", opt(h.RecordedRole)})
	}
	if h.InForceGiven != nil {
		fields = append(fields, [2]string{"in_force_from", h.InForceGiven.UTC().Format("2006-01-02T15:04:05.000000Z")})
	}
	var b strings.Builder
	for _, f := range fields {
		fmt.Fprintf(&b, "%s:%d:%s\n", f[0], len(f[1]), f[1])
	}
	return b.String()
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
// its predecessor's, or more than one current version.
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
	rep := AuditReport{Breaks: []Break{}}
	if step == nil {
		step = func(int) {}
	}
	var prev *store.Height
	current := 0
	endChain := func() {
		if prev != nil && current != 1 {
			rep.Breaks = append(rep.Breaks, Break{Designation: prev.Designation, Datum: prev.DatumCode, Version: prev.Version, ID: prev.ID,
				Problem: fmt.Sprintf("%d current versions (want exactly 1)", current)})
		}
	}
	err := store.HeightEach(ctx, r.pool, func(h store.Height) error {
		rep.Versions++
		if rep.Versions%AuditProgressStep == 0 {
			step(AuditProgressStep)
		}
		if prev == nil || prev.MarkID != h.MarkID || prev.DatumID != h.DatumID {
			endChain()
			rep.Chains++
			prev, current = nil, 0
		}
		if h.Current {
			current++
		}
		brk := func(problem string) {
			rep.Breaks = append(rep.Breaks, Break{Designation: h.Designation, Datum: h.DatumCode, Version: h.Version, ID: h.ID, Problem: problem})
		}
		var prevHash []byte
		wantVersion := 1
		if prev != nil {
			prevHash, wantVersion = prev.Hash, prev.Version+1
		}
		if h.Version != wantVersion {
			brk(fmt.Sprintf("version number %d where %d was due", h.Version, wantVersion))
		}
		switch {
		case prev == nil && h.Supersedes != nil:
			brk(fmt.Sprintf("broken link: first version supersedes id %d", *h.Supersedes))
		case prev != nil && (h.Supersedes == nil || *h.Supersedes != prev.ID):
			brk(fmt.Sprintf("broken link: supersedes %s, not version %d (id %d)", idText(h.Supersedes), prev.Version, prev.ID))
		}
		if prev != nil && !h.RecordedAt.After(prev.RecordedAt) {
			brk("recorded at or before the version it supersedes")
		}
		sum := sha256.Sum256([]byte(Canonical(prevHash, h)))
		if !bytes.Equal(sum[:], h.Hash) {
			rep.Breaks = append(rep.Breaks, Break{Designation: h.Designation, Datum: h.DatumCode, Version: h.Version, ID: h.ID,
				Problem: "hash does not match the version's contents", Expected: hex.EncodeToString(sum[:]), Stored: hex.EncodeToString(h.Hash)})
		}
		p := h
		prev = &p
		return nil
	})
	if err != nil {
		return rep, fmt.Errorf("read height versions: %w", err)
	}
	endChain()
	step(rep.Versions % AuditProgressStep)
	return rep, r.auditDerive(ctx, &rep)
}

func idText(id *int64) string {
	if id == nil {
		return "nothing"
	}
	return "id " + strconv.FormatInt(*id, 10)
}
