package cli

import (
	"bytes"
	"encoding/json"
	"testing"
)

// The characters made visible are those that act instead of showing:
//   - the C0 set 0x00–0x1F and the C1 set 0x80–0x9F of control functions,
//     ESC (0x1B) and CSI (0x9B) among them, and DEL (0x7F): ECMA-48,
//     Control Functions for Coded Character Sets, 5th edition (Ecma
//     International, 1991), sections 5.2 and 8.3;
//   - the explicit directional formatting characters LRE, RLE, PDF, LRO, RLO
//     (U+202A–U+202E), LRI, RLI, FSI, PDI (U+2066–U+2069) and the marks ALM,
//     LRM, RLM (U+061C, U+200E, U+200F): Unicode Standard Annex #9, Unicode
//     Bidirectional Algorithm, table 4 (Unicode 15.1, 2023);
//   - LINE SEPARATOR and PARAGRAPH SEPARATOR (U+2028, U+2029), which break a
//     line without a line feed (The Unicode Standard 15.1, section 5.8).
//
// Tab and line feed pass through the writer (messages and tables need
// them) but not visible(), which makes a table cell one line.
func TestVisible(t *testing.T) {
	for _, c := range []struct{ in, cell, stream string }{
		{"plain text, Ω and 📍", "plain text, Ω and 📍", "plain text, Ω and 📍"},
		{"a\x1b[2Kb", `a\u001b[2Kb`, `a\u001b[2Kb`},
		{"a\u009b2Kb", `a\u009b2Kb`, `a\u009b2Kb`},
		{"over\rwrite", `over\u000dwrite`, `over\u000dwrite`},
		{"bell\x07 del\x7f", `bell\u0007 del\u007f`, `bell\u0007 del\u007f`},
		{"tab\tline\nend", `tab\u0009line\u000aend`, "tab\tline\nend"},
		{"\u202eevil\u202c \u2066x\u2069 \u061c\u200e\u200f", `\u202eevil\u202c \u2066x\u2069 \u061c\u200e\u200f`, `\u202eevil\u202c \u2066x\u2069 \u061c\u200e\u200f`},
		{"one\u2028two\u2029", `one\u2028two\u2029`, `one\u2028two\u2029`},
		{"caf\xe9", `caf\xe9`, `caf\xe9`},
	} {
		if got := visible(c.in); got != c.cell {
			t.Errorf("visible(%q) = %q, want %q", c.in, got, c.cell)
		}
		// Written a byte at a time, so that every character is split
		// across writes.
		var b bytes.Buffer
		w := &visibleWriter{w: &b}
		for i := 0; i < len(c.in); i++ {
			if n, err := w.Write([]byte{c.in[i]}); n != 1 || err != nil {
				t.Fatalf("Write: %d, %v", n, err)
			}
		}
		if err := w.Flush(); err != nil {
			t.Fatal(err)
		}
		if got := b.String(); got != c.stream {
			t.Errorf("visibleWriter(%q) wrote %q, want %q", c.in, got, c.stream)
		}
	}
}

// What the writer shows of a JSON string reads back as the same text: a
// JSON consumer on a terminal loses nothing (RFC 8259, section 7, allows
// any character escaped as \uXXXX).
func TestVisibleKeepsJSON(t *testing.T) {
	in := "note \u202eevil\u202c, CSI \u009b, DEL \x7f, ESC \x1b"
	raw, err := json.Marshal(map[string]string{"note": in})
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if _, err := (&visibleWriter{w: &b}).Write(raw); err != nil {
		t.Fatal(err)
	}
	var back map[string]string
	if err := json.Unmarshal(b.Bytes(), &back); err != nil || back["note"] != in {
		t.Errorf("JSON through the writer: %s reads back %q (%v), want %q", b.String(), back["note"], err, in)
	}
}
