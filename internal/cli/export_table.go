package cli

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"cairn/internal/geojson"
	"cairn/internal/register"
)

// exportTableRun writes the one-file export (--format geojson|csv):
// every mark, or those in --area, with its current heights, streamed
// batch by batch from one snapshot (register.ExportTable) through a
// buffered writer, to a new file (written under a temporary name and
// linked into place, so that a failed export leaves nothing and an
// existing file is never replaced) or to standard output.
func exportTableRun(opts *exportOptions) error {
	format := strings.ToLower(opts.format)
	if format != "geojson" && format != "csv" {
		return badInput("format: %q is not geojson or csv", opts.format)
	}
	if opts.out == "" {
		return flagError{errors.New("--out: name the file to write, or - for standard output")}
	}
	p := register.ExportTableParams{}
	if opts.area != "" {
		ll, err := parseLatLon(opts.area)
		if err != nil {
			return badInput("area: %q is not LAT,LON in decimal degrees (e.g. 41.62,-97.95)", opts.area)
		}
		if opts.within == "" {
			return flagError{errors.New("--area needs --within, the radius about the point")}
		}
		if p.RadiusM, err = parseDistance(opts.within); err != nil {
			return err
		}
		p.Near = &ll
	} else if opts.within != "" {
		return flagError{errors.New("--within needs --area LAT,LON, the point it is measured from")}
	}
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	ios := opts.f.IO
	var dst io.Writer = ios.Out
	var tmp *os.File
	if opts.out != "-" {
		if _, err := os.Lstat(opts.out); err == nil {
			return badInput("out: %s is there already: cairn export never overwrites a file", opts.out)
		}
		if tmp, err = os.CreateTemp(filepath.Dir(opts.out), "."+filepath.Base(opts.out)+".*"); err != nil {
			return badInput("out: %v", err)
		}
		defer os.Remove(tmp.Name())
		defer tmp.Close()
		if err := tmp.Chmod(0o644); err != nil {
			return err
		}
		dst = tmp
	}
	bw := bufio.NewWriterSize(dst, 64<<10)
	var write func(packRow) error
	var finish func() error
	switch format {
	case "geojson":
		g := geojson.NewWriter(bw, "")
		write = func(row packRow) error { return g.Write(row.feature(opts.unit)) }
		finish = g.Close
	case "csv":
		c := csv.NewWriter(bw)
		write = func(row packRow) error { return c.Write(row.csvRecord()) }
		finish = func() error { c.Flush(); return c.Error() }
		if err := c.Write(packCSVHeader(opts.unit)); err != nil {
			return err
		}
	}
	var st register.RegisterState
	var marks, rows, inDoubt int64
	var bar *Bar
	err = r.ExportTable(opts.ctx, p, func(s register.ExportTableStart) error {
		st = s.State
		total := s.Marks
		if p.Near != nil {
			total = -1 // how many are in the area is not known before
		}
		bar = ios.StartBar(total, "exporting marks", "marks")
		return nil
	}, func(sheets []register.Datasheet) error {
		for _, s := range sheets {
			for _, row := range packRowsOf(st, s, opts.unit) {
				if err := write(row); err != nil {
					return fmt.Errorf("mark %s: %w", s.Mark.Designation, err)
				}
				rows++
			}
			if len(s.Doubts) > 0 {
				inDoubt++
			}
		}
		marks += int64(len(sheets))
		bar.Add(len(sheets))
		return nil
	})
	bar.Finish()
	if err == nil {
		err = finish()
	}
	if err == nil {
		err = bw.Flush()
	}
	if err != nil {
		return err
	}
	where := "standard output"
	if tmp != nil {
		if err := tmp.Close(); err != nil {
			return err
		}
		if err := os.Link(tmp.Name(), opts.out); err != nil {
			return badInput("out: %v", err)
		}
		where = opts.out
	}
	scope := "the register"
	if p.Near != nil {
		scope = fmt.Sprintf("within %s of %s", opts.within, opts.area)
	}
	ios.printf("wrote %s: %d mark(s) (%s), %d row(s), heights in %s, register commit %d\n", where, marks, scope, rows, opts.unit, st.Seq)
	if inDoubt > 0 {
		warnLoudly(ios, fmt.Sprintf("WARNING: %d of the %d marks exported are in doubt (the doubts column): do not rely on them until the doubt is resolved; cairn trace tells why", inDoubt, marks))
	}
	ios.printf("%s\n", cautions)
	return nil
}
