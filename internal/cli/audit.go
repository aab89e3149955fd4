package cli

import (
	"strconv"

	"cairn/internal/register"
)

// renderAudit prints an audit's report (writeAuditTables), then its
// summary (summarizeAudit).
func renderAudit(ios *IOStreams, format Format, rep register.AuditReport) error {
	if err := writeAuditTables(ios, format, rep); err != nil {
		return err
	}
	return summarizeAudit(ios, rep)
}

// writeAuditTables prints the breaks of the hash chains (the table `audit
// verify` always printed), then, when there are any, the breaks found by
// deriving the register again (KIND, WHERE, SINCE, WHAT). In JSON the whole
// report is one document (breaks and findings).
func writeAuditTables(ios *IOStreams, format Format, rep register.AuditReport) error {
	if err := render(ios, format, rep, func() Table {
		t := Table{Headers: []string{"MARK", "DATUM", "VERSION", "PROBLEM", "EXPECTED HASH", "STORED HASH"}}
		for _, b := range rep.Breaks {
			t.AddRow(b.Designation, b.Datum, strconv.Itoa(b.Version), b.Problem, b.Expected, b.Stored)
		}
		return t
	}); err != nil {
		return err
	}
	if len(rep.Findings) > 0 && format != FormatJSON {
		if len(rep.Breaks) > 0 || format == FormatTable {
			ios.Out.Write([]byte("\n"))
		}
		t := Table{Headers: []string{"KIND", "WHERE", "SINCE", "WHAT"}}
		for _, f := range rep.Findings {
			t.AddRow(f.Kind, f.Where, f.Since, f.What)
		}
		if err := writeTable(ios, format, t); err != nil {
			return err
		}
	}
	return nil
}

// summarizeAudit says on stderr what the audit checked, and returns
// checksFailed when anything broke.
func summarizeAudit(ios *IOStreams, rep register.AuditReport) error {
	if rep.SchemaUnchecked != "" {
		warnLoudly(ios, "audit: "+rep.SchemaUnchecked)
	}
	if rep.Count() > 0 {
		ios.printf("audit: %d break(s): %d in %d chain(s) of %d version(s), %d found by deriving %d run(s), %d published adjustment(s) and %d schema object(s) again\n",
			rep.Count(), len(rep.Breaks), rep.Chains, rep.Versions, len(rep.Findings), rep.Runs, rep.Adjustments, rep.SchemaObjects)
		return checksFailed{rep.Count()}
	}
	ios.printf("audit: %d chain(s) of %d version(s) verify\n", rep.Chains, rep.Versions)
	ios.printf("audit: %d run(s) parse and reduce to their stored sightings and sections, %d published adjustment(s) compute again to their results and versions",
		rep.Runs, rep.Adjustments)
	if rep.SchemaUnchecked == "" {
		ios.printf(", and the schema's %d object(s) are those its migrations make", rep.SchemaObjects)
		if rep.SchemaFrom == register.SchemaFromCache {
			ios.printf(" (compared with the copy kept from a database migrated afresh by an earlier audit; --fresh-schema makes one now)")
		}
		ios.printf("\n")
	} else {
		ios.printf("; the schema was not compared\n")
	}
	return nil
}
