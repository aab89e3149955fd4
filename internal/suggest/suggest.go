// Package suggest measures how far a mistyped name is from the names it
// could have meant, for "did you mean" hints.
//
// The edit distance is Levenshtein's (Levenshtein 1966): the fewest
// insertions, deletions and substitutions of one symbol that turn one string
// into the other, computed by the dynamic programme of Wagner and Fischer
// (1974). OptimalAlignment adds Damerau's transposition of two neighbouring
// symbols (Damerau 1964) in its restricted form, the optimal string
// alignment distance, in which no substring is edited twice. See
// docs/references.md#edit-distance.
package suggest

// Levenshtein returns the Levenshtein distance between a and b counted in
// bytes: a character outside ASCII counts as many symbols as it has bytes
// in UTF-8.
func Levenshtein(a, b string) int {
	return distance([]byte(a), []byte(b), false)
}

// OptimalAlignment returns the optimal string alignment distance between a
// and b counted in characters (runes): insertions, deletions, substitutions
// and transpositions of neighbours (TC-0421 for TC-0412) each count one.
func OptimalAlignment(a, b string) int {
	return distance([]rune(a), []rune(b), true)
}

// Nearest returns the first of names whose Levenshtein distance from s is
// the least and below limit, or "" if none is.
func Nearest(s string, names []string, limit int) string {
	best, bestD := "", limit
	for _, w := range names {
		if d := Levenshtein(s, w); d < bestD {
			best, bestD = w, d
		}
	}
	return best
}

// distance is the Wagner–Fischer recurrence over the symbols of a and b,
// with Damerau's transpositions when swaps is set. It keeps three rows of
// the table: the transposition looks two rows back.
func distance[E comparable](a, b []E, swaps bool) int {
	back := make([]int, len(b)+1) // row i-2
	prev := make([]int, len(b)+1) // row i-1
	cur := make([]int, len(b)+1)  // row i
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
			if swaps && i > 1 && j > 1 && a[i-1] == b[j-2] && a[i-2] == b[j-1] {
				cur[j] = min(cur[j], back[j-2]+1)
			}
		}
		back, prev, cur = prev, cur, back
	}
	return prev[len(b)]
}
