// Package showtext makes visible the characters that would hide or reorder
// text without showing. The register keeps text exactly as given, control
// characters included; wherever people read it (a terminal, the error
// stream, a web page) such characters are written as \uXXXX, which a JSON
// string also reads back as the same character, and a byte that is not
// UTF-8 as \xNN. A right-to-left override in a description then cannot
// make "evil" read "live", nor a control character erase the warning
// printed before it.
package showtext

import (
	"fmt"
	"strings"
	"unicode/utf8"
)

// Hidden says whether r is always made visible: the C0 controls but tab
// and line feed, DEL, the C1 controls, and the characters that reorder or
// break text without showing (the bidirectional embeddings, overrides,
// isolates and marks of Unicode Standard Annex #9, and the line and
// paragraph separators U+2028 and U+2029).
func Hidden(r rune) bool {
	switch {
	case r == '\t' || r == '\n':
		return false
	case r < 0x20, r >= 0x7f && r <= 0x9f:
		return true
	case r == 0x061c, r == 0x200e, r == 0x200f, r >= 0x202a && r <= 0x202e, r >= 0x2066 && r <= 0x2069,
		r == 0x2028, r == 0x2029:
		return true
	}
	return false
}

// Escape returns s with every character for which show is true written as
// \uXXXX and every byte that is not UTF-8 as \xNN; s itself when there is
// none.
func Escape(s string, show func(rune) bool) string {
	if !strings.ContainsFunc(s, func(r rune) bool { return r == utf8.RuneError || show(r) }) {
		return s
	}
	var b []byte
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n == 1:
			b = AppendByte(b, s[i])
		case show(r):
			b = AppendRune(b, r)
		default:
			b = append(b, s[i:i+n]...)
		}
		i += n
	}
	return string(b)
}

// AppendRune appends r written as \uXXXX.
func AppendRune(b []byte, r rune) []byte { return fmt.Appendf(b, `\u%04x`, r) }

// AppendByte appends c written as \xNN.
func AppendByte(b []byte, c byte) []byte { return fmt.Appendf(b, `\x%02x`, c) }
