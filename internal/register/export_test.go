package register

import "cairn/internal/store"

// SetBeforeSections makes Record call f on the sections just before it
// stores them.
func SetBeforeSections(p *RecordParams, f func([]store.Section)) { p.beforeSections = f }

// CheckResults is checkResults, the last gate before an adjustment's
// numbers are stored or published.
var CheckResults = checkResults
