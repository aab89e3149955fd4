package names

import (
	"golang.org/x/text/cases"
	"golang.org/x/text/unicode/norm"
	"slices"
	"strings"
	"testing"
)

// The folded forms follow the Unicode Character Database (UnicodeData.txt,
// decomposition mappings; CaseFolding.txt, status C and F; Unicode 15):
//
//	U+FF34 FULLWIDTH LATIN CAPITAL LETTER T  <wide> 0054
//	U+FF23 FULLWIDTH LATIN CAPITAL LETTER C  <wide> 0043
//	U+FF10 FULLWIDTH DIGIT ZERO               <wide> 0030
//	U+FB01 LATIN SMALL LIGATURE FI            <compat> 0066 0069
//	U+2460 CIRCLED DIGIT ONE                  <circle> 0031
//	U+00DF LATIN SMALL LETTER SHARP S         F; 0073 0073 (full folding)
//	U+0130 LATIN CAPITAL LETTER I WITH DOT ABOVE  F; 0069 0307
func TestFold(t *testing.T) {
	for in, want := range map[string]string{
		"TC-0412":           "tc-0412",
		"tc-0412":           "tc-0412",
		"\uFF34\uFF23-0412": "tc-0412",
		"TC-\uFF10412":      "tc-0412",
		"\uFB01eld-1":       "field-1",
		"BM-\u2460":         "bm-1",
		"Stra\u00DFe-3":     "strasse-3",
		"\u0130":            "i\u0307",
	} {
		if got := Fold(in); got != want {
			t.Errorf("Fold(%q) = %q, want %q", in, got, want)
		}
	}
	if !Same("TC-0412", "\uFF34\uFF23-0412") || Same("TC-0412", "TC-0421") {
		t.Error("Same disagrees with Fold")
	}
	// The Cyrillic letters are other characters, not other forms: no
	// folding makes them Latin (UTS #39 treats them as confusables).
	if Same("TC-0412", "\u0422\u0421-0412") {
		t.Error("Cyrillic ТС folded to Latin TC")
	}
}

// Scripts from Scripts.txt (Unicode 15): U+0422 CYRILLIC CAPITAL LETTER TE
// and U+0421 CYRILLIC CAPITAL LETTER ES are Cyrillic; U+0391 GREEK CAPITAL
// LETTER ALPHA is Greek; U+FF34 FULLWIDTH LATIN CAPITAL LETTER T is Latin;
// digits, HYPHEN-MINUS and FULL STOP are Common.
func TestScripts(t *testing.T) {
	for in, want := range map[string][]string{
		"TC-0412":           {"Latin"},
		"\u0422\u0421-0412": {"Cyrillic"},
		"T\u0421-0412":      {"Latin", "Cyrillic"},
		"\u0391B-7":         {"Greek", "Latin"},
		"\uFF34\uFF23-0412": {"Latin"},
		"0412-.7/_":         nil,
	} {
		if got := Scripts(in); !slices.Equal(got, want) {
			t.Errorf("Scripts(%q) = %v, want %v", in, got, want)
		}
	}
	if got := Foreign("T\u0421-0412\u0421", "Latin"); !slices.Equal(got, []rune{'\u0421'}) {
		t.Errorf("Foreign = %q", got)
	}
	if got := Describe('\u0422'); got != "Т (U+0422 CYRILLIC CAPITAL LETTER TE, Cyrillic)" {
		t.Errorf("Describe = %q", got)
	}
}

func TestSpaced(t *testing.T) {
	for in, want := range map[string]bool{
		"TC-0412": false, " TC-0412": true, "TC-0412 ": true, "TC-0412\t": true,
		"TC-0412\u00A0": true, // NO-BREAK SPACE is white space (PropList.txt)
		"TC 0412":       false,
	} {
		if got := Spaced(in); got != want {
			t.Errorf("Spaced(%q) = %v", in, got)
		}
	}
}

// Fold's ASCII path gives what golang.org/x/text's NFKC and case folding
// give (the reference), for every ASCII character and for designations
// as registers write them.
func TestFoldASCIIAsTheReference(t *testing.T) {
	reference := func(s string) string { return cases.Fold().String(norm.NFKC.String(s)) }
	var all strings.Builder
	for c := 0; c < 0x80; c++ {
		all.WriteByte(byte(c))
		if got, want := Fold(string(rune(c))), reference(string(rune(c))); got != want {
			t.Errorf("Fold(%q) = %q, the reference %q", string(rune(c)), got, want)
		}
	}
	for _, s := range []string{all.String(), "TC-0412", "Tallis 1", "MRWB-77", "AB0826X", "tc_0101/b"} {
		if got, want := Fold(s), reference(s); got != want {
			t.Errorf("Fold(%q) = %q, the reference %q", s, got, want)
		}
	}
}
