package showtext

import (
	"encoding/json"
	"testing"
	"unicode"
)

// TestHiddenIsUnicodesControlsAndBidiFormatting checks Hidden over every
// code point against the Unicode Character Database as Go's unicode
// package carries it (Unicode 15): the general category Cc (the C0 and C1
// controls and DEL), the property Bidi_Control (Unicode Standard Annex #9,
// "Unicode Bidirectional Algorithm", section 2: the explicit embeddings,
// overrides and isolates, and the marks LRM, RLM and ALM), and the
// categories Zl and Zp (the line and paragraph separators). Tab and line
// feed are the two controls that plain text may hold as they are.
func TestHiddenIsUnicodesControlsAndBidiFormatting(t *testing.T) {
	n := 0
	for r := rune(0); r <= unicode.MaxRune; r++ {
		want := r != '\t' && r != '\n' &&
			(unicode.Is(unicode.Cc, r) || unicode.Is(unicode.Bidi_Control, r) || unicode.Is(unicode.Zl, r) || unicode.Is(unicode.Zp, r))
		if Hidden(r) != want {
			t.Errorf("Hidden(%U) = %v, want %v", r, Hidden(r), want)
		}
		if want {
			n++
		}
	}
	// 65 controls less tab and line feed, 12 bidi controls, 2 separators.
	if n != 63+12+2 {
		t.Errorf("%d hidden code points, want 77", n)
	}
}

// TestEscapeReadsBackAsJSON: a character written \uXXXX reads back from a
// JSON string as itself (RFC 8259, section 7), so escaped text loses
// nothing; a byte that is not UTF-8 is written \xNN.
func TestEscapeReadsBackAsJSON(t *testing.T) {
	show := func(r rune) bool { return Hidden(r) }
	for _, s := range []string{"plain TC-0101", "evil\u202eevil", "a\x1b[2Kb", "\u2066x\u2069\u0085\u007f", "tab\tand\nline"} {
		got := Escape(s, show)
		for _, r := range got {
			if Hidden(r) {
				t.Errorf("Escape(%q) = %q still holds %U", s, got, r)
			}
		}
		var back string
		if err := json.Unmarshal([]byte(`"`+jsonQuoteRest(got)+`"`), &back); err != nil || back != s {
			t.Errorf("Escape(%q) = %q reads back from JSON as %q (%v)", s, got, back, err)
		}
	}
	if got := Escape("a\xffb", show); got != `a\xffb` {
		t.Errorf(`Escape("a\xffb") = %q, want a\xffb`, got)
	}
	if s := "unchanged"; Escape(s, show) != s {
		t.Error("text with nothing hidden changed")
	}
}

// jsonQuoteRest escapes what JSON itself requires escaped of text that
// Escape left (tab and line feed here); Escape's own \uXXXX pass as they
// are.
func jsonQuoteRest(s string) string {
	out := []byte{}
	for _, c := range []byte(s) {
		switch c {
		case '\t':
			out = append(out, `\t`...)
		case '\n':
			out = append(out, `\n`...)
		default:
			out = append(out, c)
		}
	}
	return string(out)
}
