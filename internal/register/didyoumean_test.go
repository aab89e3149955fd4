package register

import (
	"math"
	"testing"
)

func TestDidYouMeanRanksTranspositionFirst(t *testing.T) {
	got := didYouMean("TC-0421", []string{"TC-0401", "TC-0405", "TC-0412", "TC-0423", "TC-0430"}, math.MaxInt)
	if got != " (did you mean TC-0412 or TC-0401 or TC-0423?)" {
		t.Fatalf("got %q", got)
	}
	if got := didYouMean("XY-9999", []string{"TC-0412"}, math.MaxInt); got != "" {
		t.Fatalf("far designation suggested: %q", got)
	}
	if got := didYouMean("tc0412", []string{"TC-0412"}, math.MaxInt); got != " (did you mean TC-0412?)" {
		t.Fatalf("case and punctuation: %q", got)
	}
	// The folded form (names.Fold): fullwidth letters are their ASCII
	// letters (UnicodeData.txt: U+FF34 <wide> 0054, U+FF23 <wide> 0043).
	for _, typed := range []string{"tc-0412", "\uFF34\uFF23-0412", "\uFF54\uFF43\uFF10\uFF14\uFF11\uFF12"} {
		if got := didYouMean(typed, []string{"TC-0412", "XY-9999"}, math.MaxInt); got != " (did you mean TC-0412?)" {
			t.Errorf("%q: %q", typed, got)
		}
	}
}

// When only part of the register was read, a name not read may be one edit
// away: only names one edit away are offered then, never a further one.
func TestDidYouMeanPartOfTheRegister(t *testing.T) {
	cands := []string{"AB0826", "AB0862"}
	if got := didYouMean("AB0826X", cands, 1); got != " (did you mean AB0826?)" {
		t.Errorf("one edit away: %q", got)
	}
	// AB0826 is two edits from AB0826XY: within a third of the length, but
	// a mark not read could be one edit away.
	if got := didYouMean("AB0826XY", cands, 1); got != "" {
		t.Errorf("two edits with names unread: %q", got)
	}
	if got := didYouMean("AB0826XY", cands, math.MaxInt); got != " (did you mean AB0826?)" {
		t.Errorf("two edits, every name read: %q", got)
	}
}
