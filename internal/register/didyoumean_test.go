package register

import "testing"

func TestDidYouMeanRanksTranspositionFirst(t *testing.T) {
	got := didYouMean("TC-0421", []string{"TC-0401", "TC-0405", "TC-0412", "TC-0423", "TC-0430"})
	if got != " (did you mean TC-0412 or TC-0401 or TC-0423?)" {
		t.Fatalf("got %q", got)
	}
	if got := didYouMean("XY-9999", []string{"TC-0412"}); got != "" {
		t.Fatalf("far designation suggested: %q", got)
	}
	if got := didYouMean("tc0412", []string{"TC-0412"}); got != " (did you mean TC-0412?)" {
		t.Fatalf("case and punctuation: %q", got)
	}
}
