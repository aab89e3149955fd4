package cli

import (
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"cairn/internal/sheetdata"
)

// MaxTextBytes is the longest value cairn takes for any argument or flag:
// 64 KiB, far beyond any note, reason or citation, and small enough that
// no value strains an index or a terminal.
const MaxTextBytes = 64 << 10

// checkText refuses arguments and flag values that the register could not
// keep exactly: bytes that are not UTF-8 (PostgreSQL's text holds only
// valid UTF-8), the NUL character (which text cannot hold at all), and
// values longer than MaxTextBytes. Every other character, control
// characters and SQL's quotes and semicolons included, is kept exactly as
// given.
func checkText(cmd *cobra.Command, args []string) error {
	check := func(what, v string) error {
		switch {
		case len(v) > MaxTextBytes:
			return badInput("%s: %d bytes is too long (at most %d)", what, len(v), MaxTextBytes)
		case !utf8.ValidString(v):
			return badInput("%s: %q is not UTF-8 text (save the text as UTF-8)", what, clip(v))
		case strings.ContainsRune(v, 0):
			return badInput("%s: contains a NUL character, which the register cannot keep", what)
		}
		return nil
	}
	for i, a := range args {
		if err := check(argName(cmd, i), a); err != nil {
			return err
		}
	}
	var err error
	cmd.Flags().Visit(func(fl *pflag.Flag) {
		if err == nil {
			err = check("--"+fl.Name, fl.Value.String())
		}
	})
	return err
}

// argName names argument i of cmd by its usage line ("DESIGNATION").
func argName(cmd *cobra.Command, i int) string {
	words := strings.Fields(cmd.Use)
	if i+1 < len(words) && !strings.HasPrefix(words[i+1], "-") && !strings.HasPrefix(words[i+1], "[") {
		return strings.Trim(words[i+1], ".")
	}
	return "argument " + strconv.Itoa(i+1)
}

// clip shortens v for an error message.
func clip(v string) string {
	if len(v) > 40 {
		return v[:40] + "..."
	}
	return v
}

// sourceShown is a height's source text as tables, the trace and
// datasheets show it (sheetdata.SourceShown).
func sourceShown(kind, s string) string { return sheetdata.SourceShown(kind, s) }
