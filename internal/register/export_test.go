package register

import (
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
