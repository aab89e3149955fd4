// Package names says when two names of the register (mark designations,
// datum codes) are the same name, and which names are refused because
// they would look like another: names written in more than one script,
// names with space around them.
//
// Two names are the same when their folded forms are equal (Fold): the
// Unicode compatibility normalisation NFKC (Unicode Standard Annex #15),
// which writes a fullwidth Ｔ as T, then full case folding (the Unicode
// Standard, section 3.13, and CaseFolding.txt), which writes TC and tc
// alike. Scripts are those of the Unicode Character Database
// (Scripts.txt, UAX #24); digits, punctuation and symbols belong to the
// Common script and count for none. See docs/references.md#names.
package names

import (
	"fmt"
	"slices"
	"sort"
	"strings"
	"unicode"

	"golang.org/x/text/cases"
	"golang.org/x/text/unicode/norm"
	"golang.org/x/text/unicode/runenames"
)

var folder = cases.Fold()

// Fold returns the form of s by which names are compared: NFKC, then
// case folded.
func Fold(s string) string {
	// ASCII, as nearly every designation is: NFKC leaves it as it is and
	// case folding is lower-casing (Unicode's CaseFolding.txt maps A-Z to
	// a-z and no other ASCII character), without the transformers' copies.
	ascii := true
	for i := 0; i < len(s); i++ {
		if s[i] >= 0x80 {
			ascii = false
			break
		}
	}
	if ascii {
		return strings.ToLower(s)
	}
	return folder.String(norm.NFKC.String(s))
}

// Same reports whether a and b are the same name once folded.
func Same(a, b string) bool { return Fold(a) == Fold(b) }

// Normal returns s in NFKC: the name a user meant when typing compatibility
// characters (fullwidth letters and digits, ligatures).
func Normal(s string) string { return norm.NFKC.String(s) }

// scriptNames are the scripts of unicode.Scripts in a fixed order, Common
// and Inherited left out: they hold digits, punctuation and combining
// marks that belong to no one script.
var scriptNames = func() []string {
	var out []string
	for n := range unicode.Scripts {
		if n != "Common" && n != "Inherited" {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}()

// ScriptOf returns the script of r, or "" for a character of no one script
// (digits, punctuation, symbols, space, combining marks).
func ScriptOf(r rune) string {
	if unicode.In(r, unicode.Common, unicode.Inherited) {
		return ""
	}
	for _, n := range scriptNames {
		if unicode.Is(unicode.Scripts[n], r) {
			return n
		}
	}
	return ""
}

// Scripts returns the scripts of the characters of s, in the order they
// first appear.
func Scripts(s string) []string {
	var out []string
	for _, r := range s {
		if sc := ScriptOf(r); sc != "" && !slices.Contains(out, sc) {
			out = append(out, sc)
		}
	}
	return out
}

// Foreign returns the characters of s, each once, whose script is neither
// script nor none (a Cyrillic Т in a Latin name).
func Foreign(s, script string) []rune {
	var out []rune
	for _, r := range s {
		if sc := ScriptOf(r); sc != "" && sc != script && !slices.Contains(out, r) {
			out = append(out, r)
		}
	}
	return out
}

// Describe names a character for a message: Т (U+0422 CYRILLIC CAPITAL
// LETTER TE, Cyrillic).
func Describe(r rune) string {
	name := runenames.Name(r)
	if sc := ScriptOf(r); sc != "" {
		name += ", " + sc
	}
	return fmt.Sprintf("%c (U+%04X %s)", r, r, name)
}

// Spaced reports whether s begins or ends with white space.
func Spaced(s string) bool {
	return s != strings.TrimFunc(s, unicode.IsSpace)
}
