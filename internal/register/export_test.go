package register

import (
	"context"
	"time"

	"cairn/internal/store"
)

// SetBeforeSections makes Record call f on the sections just before it
// stores them.
func SetBeforeSections(p *RecordParams, f func([]store.Section)) { p.beforeSections = f }

// SetClock makes r compare the server's clock with now instead of this
// computer's clock, before its first write.
func SetClock(r *Register, now func() time.Time) { r.now = now }

// CheckResults is checkResults, the last gate before an adjustment's
// numbers are stored or published.
var CheckResults = checkResults

// SetAuditSplit makes AuditVerify divide the chains among workers
// transactions, a worker for every span mark ids; the returned function
// puts the defaults back. Not for parallel tests.
func SetAuditSplit(workers int, span int64) func() {
	w, sp := auditWorkers, auditSpanPerWorker
	auditWorkers, auditSpanPerWorker = func() int { return workers }, span
	return func() { auditWorkers, auditSpanPerWorker = w, sp }
}

// SetEvidenceSplit makes the evidence read a commit of at least rows rows
// on two transactions (as on a machine of two CPUs or more), and returns
// the function that puts the defaults back and the number of commits so
// read meanwhile. Not for parallel tests.
func SetEvidenceSplit(rows int64) func() int64 {
	r, w, n := evidenceSplitRows, auditWorkers, evidenceSplits.Load()
	evidenceSplitRows, auditWorkers = rows, func() int { return max(w(), 2) }
	return func() int64 {
		evidenceSplitRows, auditWorkers = r, w
		return evidenceSplits.Load() - n
	}
}

// AuditChains is the part of AuditVerify that recomputes the hash chains.
func (r *Register) AuditChains(ctx context.Context) (AuditReport, error) {
	rep := AuditReport{Breaks: []Break{}}
	err := r.auditChains(ctx, &rep, nil, func(int) {})
	return rep, err
}

// AuditChainsSince is auditChains from the commit of transaction since
// (nil: all the chains).
func (r *Register) AuditChainsSince(ctx context.Context, since *uint64) (AuditReport, error) {
	rep := AuditReport{Breaks: []Break{}}
	err := r.auditChains(ctx, &rep, since, func(int) {})
	return rep, err
}

// ForgetFreshSchemas empties this process's memory of freshly migrated
// schemas, so that the next audit looks in its SchemaCache or makes a
// scratch database.
func ForgetFreshSchemas() {
	freshMu.Lock()
	defer freshMu.Unlock()
	clear(freshSchemas)
}

// AuditDeriveSince is the part of AuditVerifySince that derives the runs
// and adjustments since the commit of transaction since again and
// compares the schema.
func (r *Register) AuditDeriveSince(ctx context.Context, since uint64) (AuditReport, error) {
	rep := AuditReport{Breaks: []Break{}}
	err := r.auditDerive(ctx, &rep, &since)
	return rep, err
}
