package cli

import (
	"context"
	"encoding/hex"
	"fmt"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"cairn/internal/levelbook"
	"cairn/internal/reduce"
	"cairn/internal/register"
)

// runRecordOptions are the inputs of `cairn run record`.
type runRecordOptions struct {
	f   *Factory
	ctx context.Context

	BookPath string
	// RecordParams are what the flags give the register: held heights
	// (--held-height) in the book's unit by mark, marks held at their
	// register height (--hold MARK) and the allowance of their condition,
	// class, corrections, who, new marks, acceptance and its reason. Path
	// and Book are filled when the book is read.
	register.RecordParams
	// StandardsName is --standards NAME|FILE ("" keeps the book's).
	StandardsName string
	Format        Format
}

// newCmdRunRecord builds `cairn run record`. runF replaces runRecordRun in
// tests.
func newCmdRunRecord(f *Factory, runF func(*runRecordOptions) error) *cobra.Command {
	opts := &runRecordOptions{f: f}
	var rf reductionFlags
	cmd := &cobra.Command{
		Use:   "record BOOK.csv",
		Short: "Record a level book in the register as a run",
		Long: `Record a level book in the register as a run. The book is read and reduced
exactly as by cairn run check, then stored in one transaction: the run's
description and who recorded it, the file itself byte for byte with its
SHA-256, every sighting in field order, the sections between consecutive
marks (the observations adjustments use), and the latest condition report
of each mark the run touched. A run is never changed afterwards.

The book is refused, and nothing is written, when:
  - it cannot be read (its file, line and field are named);
  - the same file is already recorded (the run holding it is named);
  - the same observations are already recorded, in a file that differs
    only in its line ends, comments, column order, spacing or the way its
    numbers are written (the run holding them is named): the same field
    work is recorded once; if that run is wrong, void it first with
    cairn run void;
  - it names marks the register lacks (all are listed): add them with
    cairn mark add, or give --new-marks to create them, unverified and
    without heights (spot heights, declared in the book, are never marks);
  - a mark held with --hold MARK has no current height on the book's datum,
    or its latest condition report says disturbed, destroyed or not found:
    give --allow-condition with --condition-reason to hold it anyway; the
    reason is kept with the run;
  - a check fails: give --accept-failed-checks with --reason to record it
    anyway; the reason is kept with the run.

Marks of the book that are not held but have a current published height
on the book's datum are compared two by two (check connections): the
difference observed between them along the run against their published
difference, within the class's tolerance for the length between them. The
1984 federal standards ask new work to check into existing marks at both
ends. A connection that fails is a failed check; a mark every one of whose
connections fails becomes suspect (shown wherever its height is read) until
a later run passes one of its connections or a condition report is made.
A section of the book levelled the other way in a run already recorded is
compared with it as a double-run section.

With --check-only the run is recorded as a check run: a crew's check into
two published marks before a job. It adjusts nothing (adjust leaves it out;
stale and trace show it) and must tie to two marks of known height.

Held heights are as for cairn run check: --hold MARK takes the mark's current
height in the register (the run keeps the version held), --held-height
MARK=HEIGHT a height you give in the book's unit (kept too).

Prints the run's number and the same report as cairn run check, and warns
about any mark last reported disturbed, destroyed or not found.

Exit status: 0 when recorded, 2 when refused, 4 when a held height or a
held mark's condition changed while the run was being recorded.

A recorded run is field evidence, not a published height: results need
review by a licensed surveyor, check into two marks, verify each mark's
condition before use, and follow the codes and regulations that govern your
work.`,
		Example: `  cairn run record north-loop.csv --by "R. Okafor"
  cairn run record levee-line.csv --hold TC-0420 --hold TC-0427
  cairn run record levee-line.csv --held-height TC-0420=3.512 --held-height TC-0427=5.104 --new-marks
  cairn run record old-line.csv --accept-failed-checks --reason "rerun impossible: marks destroyed in 2024"`,
		Args: exactArgs(1, "one level book"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.BookPath = cmd.Context(), args[0]
			var err error
			if opts.Hold, opts.HoldCurrent, opts.Class, err = rf.parse(cmd, f.IO); err != nil {
				return err
			}
			opts.CurvatureRefraction, opts.StandardsName = rf.curvatureRefraction, strings.TrimSpace(rf.standards)
			opts.AllowCondition, opts.ConditionReason = rf.allowCondition, strings.TrimSpace(rf.conditionReason)
			opts.Reason = strings.TrimSpace(opts.Reason)
			if opts.AcceptFailedChecks && opts.Reason == "" {
				return badInput("--accept-failed-checks needs --reason saying why the run is recorded anyway")
			}
			if !opts.AcceptFailedChecks && opts.Reason != "" {
				return badInput("--reason goes with --accept-failed-checks")
			}
			if opts.Format == FormatCSV {
				return badInput("--output: run record prints a report or json, not csv")
			}
			if strings.TrimSpace(opts.By) == "" {
				return badInput("--by: say who records the run")
			}
			return dispatch(opts, runF, runRecordRun)
		},
	}
	fl := cmd.Flags()
	rf.add(fl)
	fl.StringVar(&opts.By, "by", osUser(), "who records the run")
	fl.BoolVar(&opts.NewMarks, "new-marks", false, "create the marks the register lacks (condition unverified, no height)")
	fl.BoolVar(&opts.AcceptFailedChecks, "accept-failed-checks", false, "record the book even though checks fail (needs --reason)")
	fl.StringVar(&opts.Reason, "reason", "", "why a book whose checks fail is recorded")
	fl.BoolVar(&opts.CheckOnly, "check-only", false, "record the book as a check run between marks of known height: it adjusts nothing")
	addOutputFlag(cmd, &opts.Format)
	return cmd
}

// recordedJSON is `run record -o json`.
type recordedJSON struct {
	Run          runJSON        `json:"run"`
	CreatedMarks []string       `json:"created_marks"`
	Held         []runHeldJSON  `json:"held"`
	Cautions     []string       `json:"cautions"`
	Warnings     []string       `json:"warnings"`
	Reduction    *reduce.Result `json:"reduction"`
	CheckOnly    bool           `json:"check_only"`
	// Suspect are the marks every one of whose check connections failed.
	Suspect []string `json:"suspect"`
}

// runRecordRun records the book and prints its report.
func runRecordRun(opts *runRecordOptions) error {
	ios := opts.f.IO
	data, err := levelbook.ReadBytes(opts.BookPath)
	if err != nil {
		return err
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	p := opts.RecordParams
	p.Path, p.Book = opts.BookPath, data
	// The report shows every row of the reduced notes, read again from
	// the book a sighting at a time as they are written, so that
	// recording the largest book holds none (p.KeepNotes is not set).
	if opts.StandardsName != "" {
		if p.Standards, err = resolveStandards(opts.StandardsName, "", ""); err != nil {
			return err
		}
	}
	rec, err := r.Record(opts.ctx, p)
	if err != nil {
		return err
	}
	created := []string{}
	for _, m := range rec.Marks {
		if m.Created {
			created = append(created, m.Designation)
		}
	}
	if opts.Format == FormatJSON {
		for _, c := range append(slices.Clip(rec.Cautions), rec.Warnings...) {
			warnLoudly(ios, c)
		}
		res := *rec.Result
		res.Rows, res.Setups = nil, nil // written in their places, one at a time
		return writeJSONWithRows(ios.Out, recordedJSON{Run: toRunJSON(rec.Run), CreatedMarks: created, Cautions: nonNil(rec.Cautions),
			Warnings: nonNil(rec.Warnings), Reduction: &res, CheckOnly: rec.CheckOnly, Suspect: nonNil(rec.Suspect),
			Held: toHeldJSON(rec.Run.Unit, rec.Held)}, rec.Result, rowsScanned(rec.Result, data))
	}
	w := ios.Out
	run := rec.Run
	fmt.Fprintf(w, "Recorded run %d from %s (%d bytes, SHA-256 %s) by %s\n", run.ID, run.FileName, run.BookSize, hex.EncodeToString(run.BookSHA256), run.RecordedBy)
	if run.AcceptedReason != "" {
		fmt.Fprintf(w, "Recorded with %d failed check(s), accepted: %s\n", run.ChecksFailed, run.AcceptedReason)
	}
	if len(created) > 0 {
		fmt.Fprintf(w, "Created marks (unverified, no height): %s\n", strings.Join(created, ", "))
	}
	if rec.CheckOnly {
		fmt.Fprintln(w, "Recorded as a check run: it adjusts nothing")
	}
	// The report's warnings are in it, repeated on ErrOut when Out is not
	// a terminal.
	for _, c := range append(slices.Clip(rec.Cautions), rec.Warnings...) {
		warnInReport(ios, c)
	}
	for _, m := range rec.Suspect {
		warnInReport(ios, fmt.Sprintf("WARNING: mark %s is now SUSPECT: every check connection of it in this run failed; check it in the field and report its condition before relying on its height", m))
	}
	fmt.Fprintln(w)
	return writeReportOf(w, rec.Result, rowsScanned(rec.Result, data), heldNotes(toHeldJSON(rec.Run.Unit, rec.Held)))
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}
