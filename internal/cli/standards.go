package cli

import (
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"cairn/internal/reduce"
	"cairn/internal/standards"
	"cairn/internal/store"
)

// standardsLong is the help of `cairn standards`.
const standardsLong = `The standards a run is judged by: named, versioned profiles of tolerances
(loop and section misclosure constants, sight length, setup and section
imbalance, three-wire half-interval agreement, check-connection tolerance).

Built in: fgcc-1984, the Federal Geodetic Control Committee's 1984 leveling
table (the default), and en0593, the US Army Engineer School's course values
for second-order leveling. Each value carries its source and its status:
"read" when it was seen in the source, "from memory" when it was not. Most of
the 1984 table is from memory: its leveling section could not be read when
cairn's copy was made, and every report says so.

An office's own standards are a profile file (docs/standards.md): local codes
differ, and govern. A book names its profile with "# standards: NAME" or
"# standards: FILE" (a path from the book's directory); run check and run
record take --standards NAME|FILE, which overrides the book. A recorded run
keeps the profile's name and version (a built-in's edition, or the file's
SHA-256, and the file itself), shown by run show and trace.

Tolerances judge field work; they do not approve it: results need review by a
licensed surveyor, check into two marks, verify each mark's condition before
use, and follow the codes and regulations that govern your work.`

func newCmdStandards(f *Factory) *cobra.Command {
	return commandGroup(&cobra.Command{Use: "standards", Short: "Standards profiles that judge runs: list them, show one", Long: standardsLong},
		newCmdStandardsList(f, nil), newCmdStandardsShow(f, nil))
}

// standardsListOptions are the inputs of `cairn standards list`.
type standardsListOptions struct {
	IO     *IOStreams
	Format Format
}

func newCmdStandardsList(f *Factory, runF func(*standardsListOptions) error) *cobra.Command {
	opts := &standardsListOptions{IO: f.IO}
	cmd := &cobra.Command{
		Use:   "list",
		Short: "List the built-in standards profiles",
		Long: `List the built-in standards profiles: name, edition, classes covered and
title. An office's profile file is shown with cairn standards show FILE.`,
		Args: exactArgs(0, "no arguments"),
		RunE: func(cmd *cobra.Command, _ []string) error { return dispatch(opts, runF, standardsListRun) },
	}
	addOutputFlag(cmd, &opts.Format)
	return cmd
}

type standardsListJSON struct {
	Name    string   `json:"name"`
	Version string   `json:"version"`
	Default bool     `json:"default"`
	Classes []string `json:"classes"`
	Title   string   `json:"title"`
	Source  string   `json:"source"`
}

func standardsListRun(opts *standardsListOptions) error {
	out := []standardsListJSON{}
	for _, p := range standards.Builtins() {
		var cs []string
		for _, c := range p.Classes {
			cs = append(cs, string(c))
		}
		out = append(out, standardsListJSON{p.Name, p.Version(), p == standards.Default(), cs, p.Title, p.Source})
	}
	return render(opts.IO, opts.Format, out, func() Table {
		t := Table{Headers: []string{"NAME", "EDITION", "DEFAULT", "CLASSES", "TITLE"}}
		for _, p := range out {
			def := ""
			if p.Default {
				def = "yes"
			}
			t.AddRow(p.Name, p.Version, def, strings.Join(p.Classes, ", "), p.Title)
		}
		return t
	})
}

// standardsShowOptions are the inputs of `cairn standards show`.
type standardsShowOptions struct {
	IO     *IOStreams
	Name   string
	AsFile bool
	Format Format
}

func newCmdStandardsShow(f *Factory, runF func(*standardsShowOptions) error) *cobra.Command {
	opts := &standardsShowOptions{IO: f.IO}
	cmd := &cobra.Command{
		Use:   "show [NAME|FILE]",
		Short: "Show a standards profile: every value with its source and status",
		Long: `Show a standards profile, built in (by name; the default, fgcc-1984, when
none is named) or an office's file: its source and version, and for each
class every tolerance with its source and its status in plain words (read,
from memory, cairn's choice, or the office's own).

--as-file writes the profile in the file format (docs/standards.md), a start
for an office's own: rename its "profile:" line, set its values and source.
A file is read and checked as run check would: a fault names the file, the
line and the field.`,
		Example: `  cairn standards show
  cairn standards show en0593 -o json
  cairn standards show fgcc-1984 --as-file > office.std
  cairn standards show office.std`,
		Args: func(cmd *cobra.Command, args []string) error {
			if len(args) > 1 {
				return badInput("%s wants at most one profile, NAME or FILE (got %d arguments)", commandName(cmd), len(args))
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			if len(args) == 1 {
				opts.Name = args[0]
			}
			if opts.AsFile && opts.Format != FormatTable {
				return badInput("--as-file writes the file format: leave out -o")
			}
			return dispatch(opts, runF, standardsShowRun)
		},
	}
	cmd.Flags().BoolVar(&opts.AsFile, "as-file", false, "write the profile in the profile file format")
	addOutputFlag(cmd, &opts.Format)
	return cmd
}

type standardsShowJSON struct {
	standards.Ref
	Notes      []string               `json:"notes"`
	Tolerances []standards.Tolerances `json:"tolerances"`
}

func standardsShowRun(opts *standardsShowOptions) error {
	p, err := standards.Resolve(opts.Name, "")
	if err != nil {
		return badInput("%v", err)
	}
	if opts.AsFile {
		_, err := io.WriteString(opts.IO.Out, p.Text())
		return err
	}
	var tols []standards.Tolerances
	for _, c := range p.Classes {
		t, err := p.For(c)
		if err != nil {
			return err
		}
		tols = append(tols, t)
	}
	switch opts.Format {
	case FormatJSON:
		return writeJSON(opts.IO.Out, standardsShowJSON{p.Ref(), nonNil(p.Notes), tols})
	case FormatCSV:
		return writeTable(opts.IO, FormatCSV, standardsValues(tols))
	}
	w := opts.IO.Out
	fmt.Fprintf(w, "Standards profile %s: %s\n", p.Name, p.Title)
	fmt.Fprintf(w, "Source: %s\n", p.Source)
	fmt.Fprintf(w, "Version: %s\n", standards.Ref.Words(p.Ref()))
	for _, n := range p.Notes {
		fmt.Fprintf(w, "Note: %s\n", n)
	}
	fmt.Fprintln(w)
	t := standardsValues(tols)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, strings.Join(t.Headers, "\t"))
	for _, r := range t.Rows {
		fmt.Fprintln(tw, strings.Join(r, "\t"))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintln(w, "\n(An empty cell: the profile does not give the value. Ground clearance is not checked: a book carries none.)")
	for _, tol := range tols {
		fmt.Fprintf(w, "\n%s\n", tol.Class)
		for _, f := range standards.Fields {
			pv, ok := tol.Provenance[f]
			if !ok || tol.Value(f) == 0 {
				continue
			}
			fmt.Fprintf(w, "  %-58s %-8s %s: %s\n", f.Words(), strconv.FormatFloat(tol.Value(f), 'g', -1, 64), pv.Status, pv.Source)
		}
	}
	fmt.Fprintln(w, "\nTolerances judge field work; they do not approve it: review by a licensed surveyor, check into two marks, verify each mark's condition before use; local codes govern.")
	return nil
}

// standardsValues is a profile's values, one row per class, under the
// file format's column names (their units in the names).
func standardsValues(tols []standards.Tolerances) Table {
	t := Table{Headers: []string{"class"}}
	for _, f := range standards.Fields {
		t.Headers = append(t.Headers, string(f))
	}
	for _, tol := range tols {
		row := []string{string(tol.Class)}
		for _, f := range standards.Fields {
			v := ""
			if x := tol.Value(f); x != 0 {
				v = strconv.FormatFloat(x, 'g', -1, 64)
			}
			row = append(row, v)
		}
		t.AddRow(row...)
	}
	return t
}

// standardsFlagHelp is the --standards flag's help on run check and run
// record.
const standardsFlagHelp = "standards profile to judge the run by, overriding the book's \"# standards:\": fgcc-1984 (default), en0593, or an office's profile FILE"

// resolveStandards finds the profile that judges a book: the flag's (a
// file from the working directory), else the book's (a file from the
// book's directory), else the default. A profile that cannot be read is
// bad input (exit status 2).
func resolveStandards(flag, bookName, bookDir string) (*standards.Profile, error) {
	name, dir := flag, ""
	if name == "" {
		name, dir = bookName, bookDir
	}
	p, err := standards.Resolve(name, dir)
	if err != nil {
		return nil, badInput("%v", err)
	}
	return p, nil
}

// standardsReport is the lines of a report that say which standard judged
// the run, with its source and the status of its values in plain words.
func standardsReport(w io.Writer, r *reduce.Result) {
	fmt.Fprintf(w, "Judged by standards %s\n", r.Standards.Words())
	if r.Standards.Source != "" {
		fmt.Fprintf(w, "  source: %s\n", r.Standards.Source)
	}
	if r.Tolerances == nil {
		return
	}
	fmt.Fprintf(w, "  %s values: %s\n", r.Tolerances.Class, r.Tolerances.Summary())
	if mem := r.Tolerances.FromMemoryFields(); len(mem) > 0 {
		var names []string
		for _, f := range mem {
			names = append(names, f.Short())
		}
		fmt.Fprintf(w, "  CAUTION: the %s values were recalled, not read in their source: confirm them before relying on this report.\n", strings.Join(names, ", "))
	}
}

// runStandardsJSON is what a recorded run keeps of its standards profile
// (store.RunStandards), with the words the reports use.
type runStandardsJSON struct {
	// Profile is "" for a run recorded before the profile was kept.
	Profile string `json:"profile"`
	Version string `json:"version"`
	Source  string `json:"source"`
	Builtin bool   `json:"builtin"`
	// Words names the profile and its version in plain words; Values
	// says how sure cairn is of the values of the run's class.
	Words  string `json:"words"`
	Values string `json:"values"`
}

func toRunStandardsJSON(s store.RunStandards, class string) runStandardsJSON {
	ref := standards.Ref{Name: s.Profile, Version: s.Version, Source: s.Source, Builtin: s.File == nil && s.Profile != ""}
	var p *standards.Profile
	switch {
	case s.File != nil:
		if fp, err := standards.Parse(s.Profile, s.File); err == nil {
			p = fp
			ref.File = "kept with the run"
		}
	case s.Profile != "":
		p, _ = standards.Builtin(s.Profile)
	default:
		p = standards.Default()
	}
	j := runStandardsJSON{Profile: s.Profile, Version: s.Version, Source: s.Source, Builtin: ref.Builtin, Words: ref.Words()}
	c, err := standards.ParseClass(class)
	if p == nil || err != nil || !p.Has(c) {
		return j
	}
	t, _ := p.For(c)
	j.Values = t.Summary()
	if p.Builtin && s.Profile != "" && p.Edition != s.Version {
		j.Values += fmt.Sprintf(" (as this cairn's edition %s says; the run was judged by edition %s)", p.Edition, s.Version)
	}
	if s.Profile == "" {
		j.Values += " (today's fgcc-1984)"
	}
	return j
}
