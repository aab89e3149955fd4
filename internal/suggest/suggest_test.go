package suggest

import "testing"

// Values worked by hand from the definitions (docs/references.md#edit-distance).
func TestDistances(t *testing.T) {
	cases := []struct {
		a, b      string
		lev, osa  int
		reasoning string
	}{
		{"", "", 0, 0, "equal strings"},
		{"", "abc", 3, 3, "three insertions"},
		{"abc", "", 3, 3, "three deletions"},
		{"clas", "class", 1, 1, "insert s"},
		{"midle", "middle", 1, 1, "insert d"},
		// common practice: the usual textbook example. k→s, e→i, insert g;
		// the lengths differ by one and two letters differ besides.
		{"kitten", "sitting", 3, 3, "two substitutions and an insertion"},
		{"ab", "ba", 2, 1, "two substitutions, or one transposition"},
		{"TC0421", "TC0412", 2, 1, "2→1 and 1→2, or swap the last two"},
		// One insertion is needed; each of xca, cxa, cax differs from abc in
		// two places, so Levenshtein needs 3. The swap ca→ac followed by an
		// insertion between would edit the swapped pair again, which the
		// optimal string alignment forbids, so it too is 3.
		{"ca", "abc", 3, 3, "no substring edited twice"},
		// é is two bytes in UTF-8 (C3 A9) but one character.
		{"é", "e", 2, 1, "bytes against characters"},
		{"TC-0412", "tc-0412", 2, 2, "case counts"},
	}
	for _, c := range cases {
		if got := Levenshtein(c.a, c.b); got != c.lev {
			t.Errorf("Levenshtein(%q, %q) = %d, want %d (%s)", c.a, c.b, got, c.lev, c.reasoning)
		}
		if got := Levenshtein(c.b, c.a); got != c.lev {
			t.Errorf("Levenshtein(%q, %q) = %d, want %d (symmetric)", c.b, c.a, got, c.lev)
		}
		if got := OptimalAlignment(c.a, c.b); got != c.osa {
			t.Errorf("OptimalAlignment(%q, %q) = %d, want %d (%s)", c.a, c.b, got, c.osa, c.reasoning)
		}
		if got := OptimalAlignment(c.b, c.a); got != c.osa {
			t.Errorf("OptimalAlignment(%q, %q) = %d, want %d (symmetric)", c.b, c.a, got, c.osa)
		}
	}
}

func TestNearest(t *testing.T) {
	keys := []string{"units", "class", "reading", "crew"}
	cases := []struct {
		s     string
		names []string
		limit int
		want  string
	}{
		{"clas", keys, 3, "class"},
		{"raeding", keys, 3, "reading"}, // Levenshtein 2: the swap counts two
		{"datum", keys, 3, ""},
		{"crow", keys, 3, "crew"},
		{"ab", []string{"ax", "ay"}, 3, "ax"},   // a tie at 1: the first listed wins
		{"ab", []string{"xyz", "ay"}, 3, "ay"},  // 3 is not below the limit; ay is 1
		{"abc", []string{"ax", "xyz"}, 2, ""},   // ax is 2 away, not below 2
		{"abc", []string{"xyz", "ax"}, 4, "ax"}, // the nearer, not the first
		{"", []string{"a"}, 1, ""},              // a is 1 away
	}
	for _, c := range cases {
		if got := Nearest(c.s, c.names, c.limit); got != c.want {
			t.Errorf("Nearest(%q, %q, %d) = %q, want %q", c.s, c.names, c.limit, got, c.want)
		}
	}
}
