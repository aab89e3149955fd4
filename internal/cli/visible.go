package cli

import (
	"io"
	"unicode/utf8"

	"cairn/internal/showtext"
)

// Text from the register (notes, descriptions, reasons, a book's header) is
// kept exactly as given, control characters included. Printed raw to a
// terminal, such text could move the cursor, erase the line before it (a
// loud warning, say) or reverse the order of what follows, so cairn shows
// it made visible instead:
//
//   - on a terminal, everything cairn writes passes through a
//     visibleWriter;
//   - the error stream, read by people, always does;
//   - in a pipe, data is exact (JSON, CSV, a book's bytes), except that a
//     tab-separated table escapes the cells' own tabs and line breaks, so
//     that each row stays one line.
//
// A character made visible is written as \uXXXX, which a JSON string also
// reads back as the same character, or as \xNN for a byte that is not
// UTF-8.

// visible returns s with every hidden character (showtext.Hidden), and
// tab and line feed too, written as \uXXXX, and any byte that is not
// UTF-8 as \xNN: one line of plain text, fit for a table's cell.
func visible(s string) string {
	return showtext.Escape(s, func(r rune) bool { return r == '\t' || r == '\n' || showtext.Hidden(r) })
}

// visibleWriter writes to w with every hidden character made visible
// (tabs and line feeds pass as they are). A character split across two
// writes is held until its last byte comes.
type visibleWriter struct {
	w       io.Writer
	pending []byte
}

// Flush writes the bytes held for a character that never came, as \xNN.
func (v *visibleWriter) Flush() error {
	if len(v.pending) == 0 {
		return nil
	}
	var out []byte
	for _, c := range v.pending {
		out = showtext.AppendByte(out, c)
	}
	v.pending = nil
	_, err := v.w.Write(out)
	return err
}

func (v *visibleWriter) Write(p []byte) (int, error) {
	buf := p
	if len(v.pending) > 0 {
		buf = append(v.pending, p...)
		v.pending = nil
	}
	var out []byte
	start := 0 // buf[start:i] passes unchanged
	for i := 0; i < len(buf); {
		r, n := utf8.DecodeRune(buf[i:])
		if r == utf8.RuneError && n <= 1 && !utf8.FullRune(buf[i:]) {
			// The rest may be the start of a character still to come.
			out = append(out, buf[start:i]...)
			v.pending = append([]byte(nil), buf[i:]...)
			start = len(buf)
			break
		}
		switch {
		case r == utf8.RuneError && n == 1:
			out = showtext.AppendByte(append(out, buf[start:i]...), buf[i])
			start = i + n
		case showtext.Hidden(r):
			out = showtext.AppendRune(append(out, buf[start:i]...), r)
			start = i + n
		}
		i += n
	}
	if start < len(buf) {
		out = append(out, buf[start:]...)
	}
	if _, err := v.w.Write(out); err != nil {
		return 0, err
	}
	return len(p), nil
}
