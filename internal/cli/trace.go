package cli

import (
	"context"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/adjust"
	"cairn/internal/register"
)

// traceJSON is the derivation of a mark's heights in machine output.
type traceJSON struct {
	Mark    string     `json:"mark"`
	AsOf    *time.Time `json:"as_of"`
	KnownAt *time.Time `json:"known_at"`
	// Doubts are the doubts about the mark and the versions traced (each
	// node carries its own in its doubts).
	Doubts   register.Doubts    `json:"doubts"`
	Versions []traceVersionJSON `json:"versions"`
}

// traceVersionJSON is a node of the tree: a version and, when it came from
// an adjustment, the adjustment with its runs and held versions.
type traceVersionJSON struct {
	heightJSON
	HeightID int64 `json:"height_id"`
	// Repeated: the derivation is given earlier in the same trace.
	Repeated bool `json:"repeated"`
	// HeldAs, for a version an adjustment held, is how it held it: fixed,
	// weighted (with HeldSDMM, the standard deviation in millimetres) or
	// check (a check mark of a minimally constrained adjustment: adjusted
	// from the first held mark, not held).
	HeldAs     string               `json:"held_as,omitempty"`
	HeldSDMM   *float64             `json:"held_sd_mm,omitempty"`
	Adjustment *traceAdjustmentJSON `json:"adjustment,omitempty"`
	Import     *traceImportJSON     `json:"import,omitempty"`
}

// traceImportJSON is the import that wrote a version.
type traceImportJSON struct {
	ImportID   int64            `json:"import_id"`
	Source     string           `json:"source"`
	RecordedBy string           `json:"recorded_by"`
	RecordedAt time.Time        `json:"recorded_at"`
	Files      []importFileJSON `json:"files"`
}

type importFileJSON struct {
	Name   string `json:"name"`
	SHA256 string `json:"sha256"`
	Rows   int64  `json:"rows"`
}

type traceAdjustmentJSON struct {
	AdjustmentID int64              `json:"adjustment_id"`
	Method       string             `json:"method"`
	Status       string             `json:"status"`
	StatusBy     string             `json:"status_by"`
	StatusAt     *time.Time         `json:"status_at"`
	StatusReason string             `json:"status_reason"`
	Runs         []runRefJSON       `json:"runs"`
	Held         []traceVersionJSON `json:"held"`
	// AcceptedFailedChecks is the acceptance of failed checks the
	// adjustment was published with; null when none.
	AcceptedFailedChecks *acceptanceJSON `json:"accepted_failed_checks"`
}

func toTraceVersionJSON(n *register.TraceVersion) traceVersionJSON {
	j := traceVersionJSON{heightJSON: toHeightJSON(n.Height, ""), HeightID: n.ID, Repeated: n.Repeated}
	j.Doubts = doubtsJSON(n.Doubts)
	if e := n.Import; e != nil {
		ji := &traceImportJSON{ImportID: e.ID, Source: e.Source, RecordedBy: e.RecordedBy, RecordedAt: e.RecordedAt, Files: []importFileJSON{}}
		for _, f := range e.Files {
			ji.Files = append(ji.Files, importFileJSON(f))
		}
		j.Import = ji
	}
	if a := n.Adjustment; a != nil {
		ja := &traceAdjustmentJSON{AdjustmentID: a.ID, Method: a.Method, Status: a.Status, StatusBy: a.StatusBy,
			StatusAt: a.StatusAt, StatusReason: a.StatusReason, Runs: []runRefJSON{}, Held: []traceVersionJSON{},
			AcceptedFailedChecks: toAcceptanceJSON(a.Accepted)}
		for _, r := range a.Runs {
			ja.Runs = append(ja.Runs, toRunRef(r))
		}
		for _, h := range a.Held {
			jh := toTraceVersionJSON(h)
			jh.HeldAs, jh.HeldSDMM = heldAs(a.Parameters, h.Designation)
			ja.Held = append(ja.Held, jh)
		}
		j.Adjustment = ja
	}
	return j
}

// traceOptions are the inputs of `cairn trace`.
type traceOptions struct {
	f       *Factory
	ctx     context.Context
	format  Format
	params  register.TraceParams
	asOf    string
	knownAt string
}

func newCmdTrace(f *Factory, runF func(*traceOptions) error) *cobra.Command {
	opts := &traceOptions{f: f}
	cmd := &cobra.Command{
		Use:   "trace DESIGNATION [--datum CODE] [--as-of TIME] [--known-at TIME]",
		Short: "Show where a benchmark's height came from, down to outside sources",
		Long: `Show the derivation of a benchmark's height as a tree: the version in force
(now, or at --as-of), the adjustment it came from, that adjustment's runs
with the SHA-256 of their field books as recorded (and, for a run since
voided, when, by whom and why), and the versions it held,
each traced in turn, down to the outside publications they cite. Each
version says who recorded it: the name given with --by and the database
login role that wrote it, when it came in force and when the register
recorded it. --as-of and --known-at pick the version as height show does:
in force at --as-of, as the register knew it at --known-at.

-o json gives the same tree; -o csv gives one row per node with its depth.`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation = cmd.Context(), args[0]
			var err error
			if opts.params.AsOf, err = parseAsOf(opts.asOf); err != nil {
				return err
			}
			if opts.params.KnownAt, err = parseKnownAt(opts.knownAt); err != nil {
				return err
			}
			return dispatch(opts, runF, traceRun)
		},
	}
	addOutputFlag(cmd, &opts.format)
	cmd.Flags().StringVar(&opts.params.Datum, "datum", "", "only this datum")
	cmd.Flags().StringVar(&opts.asOf, "as-of", "", asOfUsage("trace the version"))
	cmd.Flags().StringVar(&opts.knownAt, "known-at", "", knownAtUsage("trace the version"))
	return cmd
}

// traceRun prints the derivation of the mark's heights.
func traceRun(opts *traceOptions) error {
	ios := opts.f.IO
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	tr, err := r.Trace(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	warnDoubts(ios, tr.Doubts)
	out := traceJSON{Mark: tr.Mark.Designation, AsOf: tr.AsOf, KnownAt: tr.KnownAt, Doubts: doubtsJSON(tr.Doubts), Versions: []traceVersionJSON{}}
	for _, v := range tr.Versions {
		out.Versions = append(out.Versions, toTraceVersionJSON(v))
	}
	switch opts.format {
	case FormatJSON:
		return writeJSON(ios.Out, out)
	case FormatCSV:
		t := Table{Headers: []string{"depth", "node", "mark", "datum", "version", "height" + perRowUnit, "unit", "source_kind", "source", "adjustment_id", "run_id", "book_sha256",
			"held_as", "accepted_failed_checks", "doubt", "in_force_from", "recorded"}}
		for _, v := range out.Versions {
			traceRows(&t, v, 0)
		}
		return writeTable(ios, opts.format, t)
	}
	for i, v := range out.Versions {
		if i > 0 {
			fmt.Fprintln(ios.Out)
		}
		writeTrace(ios.Out, v, "")
	}
	return nil
}

// heldAs names how an adjustment with settings pm held mark
// (register.Parameters.HeldAs, the one rule), with the standard deviation
// in millimetres of a mark held weighted.
func heldAs(pm register.Parameters, mark string) (string, *float64) {
	switch pm.HeldAs(mark) {
	case adjust.HeldWeighted:
		sd := pm.HoldSDMM[mark]
		return "weighted", &sd
	case adjust.HeldCheck:
		return "check", nil
	case adjust.HeldFixed:
		return "fixed", nil
	}
	return "", nil
}

// heldText is how a held version was held, as the trace says it.
func heldText(v traceVersionJSON) string {
	switch v.HeldAs {
	case "weighted":
		return fmt.Sprintf("held weighted, sd %g mm:", deref(v.HeldSDMM))
	case "check":
		return "check mark (minimally constrained: adjusted from the first held mark, not held):"
	case "fixed":
		return "held fixed:"
	}
	return "held:"
}

// runText is a run's date and class as the trace says them.
func runText(r runRefJSON) string {
	date := "date not booked"
	if r.ObservedOn != nil {
		date = "observed " + *r.ObservedOn
	}
	class := "class not booked"
	if r.Class != "" {
		class = "class " + r.Class
	}
	return date + ", " + class
}

// writeTrace writes the tree under v, indented.
func writeTrace(w io.Writer, v traceVersionJSON, indent string) {
	fmt.Fprintf(w, "%s%s on %s, version %d: %s (%s), in force from %s, recorded %s by %s\n", indent, v.Mark, v.Datum, v.Version,
		valueOrWithdrawn(v.heightJSON), v.SourceKind, timeText(v.InForceFrom), timeText(v.CommittedAt), byText(v.heightJSON))
	in := indent + "    "
	for _, d := range v.Doubts {
		fmt.Fprintf(w, "%s!! DOUBT: %s\n", in, d.Text)
	}
	fmt.Fprintf(w, "%sreason: %s\n", in, v.Reason)
	switch {
	case v.Repeated:
		fmt.Fprintf(w, "%s(derivation shown above)\n", in)
	case v.Adjustment != nil:
		a := v.Adjustment
		status := a.Status
		if a.StatusAt != nil {
			status += fmt.Sprintf(" %s by %s: %s", timeText(*a.StatusAt), a.StatusBy, a.StatusReason)
		}
		fmt.Fprintf(w, "%sfrom adjustment %d (%s), %s\n", in, a.AdjustmentID, a.Method, status)
		if acc := a.AcceptedFailedChecks; acc != nil {
			fmt.Fprintf(w, "%s%s\n", in, acceptanceText(acc, in))
		}
		for _, r := range a.Runs {
			fmt.Fprintf(w, "%s    run %d %q (%s): book %s, sha256 %s\n", in, r.RunID, r.Name, runText(r), r.FileName, r.BookSHA256)
			fmt.Fprintf(w, "%s        judged by standards %s\n", in, r.Standards.Words)
			if v := r.Voided; v != nil {
				fmt.Fprintf(w, "%s        VOIDED %s by %s: %s\n", in, timeText(v.VoidedAt), v.VoidedBy, v.Reason)
			}
		}
		for _, h := range a.Held {
			fmt.Fprintf(w, "%s    %s\n", in, heldText(h))
			writeTrace(w, h, in+"        ")
		}
	default:
		fmt.Fprintf(w, "%ssource: %s\n", in, sourceShown(v.SourceKind, v.Source))
		if e := v.Import; e != nil {
			fmt.Fprintf(w, "%simported by import %d, %s by %s, from %s\n", in, e.ImportID, timeText(e.RecordedAt), e.RecordedBy, e.Source)
			for _, f := range e.Files {
				fmt.Fprintf(w, "%s    %s (%d rows), sha256 %s\n", in, f.Name, f.Rows, f.SHA256)
			}
		}
	}
}

func traceRows(t *Table, v traceVersionJSON, depth int) {
	adj := ""
	if v.Adjustment != nil {
		adj = strconv.FormatInt(v.Adjustment.AdjustmentID, 10)
	}
	accepted := ""
	if v.Adjustment != nil && v.Adjustment.AcceptedFailedChecks != nil {
		accepted = acceptanceText(v.Adjustment.AcceptedFailedChecks, "")
	}
	t.AddRow(strconv.Itoa(depth), "version", v.Mark, v.Datum, strconv.Itoa(v.Version), deref(v.Value), deref(v.Unit), v.SourceKind, sourceShown(v.SourceKind, v.Source), adj, "", "",
		v.HeldAs, accepted, v.Doubts.Words(), v.InForceFrom.UTC().Format(time.RFC3339Nano), v.CommittedAt.UTC().Format(time.RFC3339Nano))
	if v.Adjustment == nil || v.Repeated {
		return
	}
	for _, r := range v.Adjustment.Runs {
		t.AddRow(strconv.Itoa(depth+1), "run", "", "", "", "", "", "", r.FileName, adj, strconv.FormatInt(r.RunID, 10), r.BookSHA256, "", "", "", "", "")
	}
	for _, h := range v.Adjustment.Held {
		traceRows(t, h, depth+1)
	}
}

func valueOrWithdrawn(h heightJSON) string {
	if h.Value == nil {
		return "withdrawn"
	}
	return strings.TrimSpace(*h.Value + " " + deref(h.Unit))
}
