package cli

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/register"
)

// markEditOptions are the inputs of `cairn mark edit`.
type markEditOptions struct {
	f        *Factory
	ctx      context.Context
	params   register.MarkEditParams
	lat, lon float64
	// The text fields as given; set in params only when their flag is.
	typ, setting, stamping, directions, description, posSource, toReach string
}

func newCmdMarkEdit(f *Factory, runF func(*markEditOptions) error) *cobra.Command {
	opts := &markEditOptions{f: f}
	cmd := &cobra.Command{
		Use:   "edit DESIGNATION|ALIAS --reason TEXT [--directions ...] [--description ...] [--lat ... --lon ...] ...",
		Short: "Write a new version of a benchmark's description",
		Long: `Write a new version of a benchmark's description: the current one with the
fields given changed, with the reason. Nothing is changed in place: every
version is kept, and 'cairn mark show --history' lists them. The designation
never changes.`,
		Example: `  cairn mark edit TC-0412 --directions "from the Mere River bridge, 40 m north along the levee" \
    --reason "bridge rebuilt in 2023; old directions no longer lead to the mark"
  cairn mark edit TC-0412 --lat 41.62071 --lon -97.94862 --position-source "hand-held GNSS, 2024-05-14" \
    --reason "position measured on the last visit"`,
		Args: exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation = cmd.Context(), args[0]
			if err := directionsFlag(cmd, f.IO, &opts.directions, opts.toReach); err != nil {
				return err
			}
			fl := cmd.Flags()
			for _, x := range []struct {
				flag string
				val  *string
				dst  **string
			}{
				{"type", &opts.typ, &opts.params.Type}, {"setting", &opts.setting, &opts.params.Setting},
				{"stamping", &opts.stamping, &opts.params.Stamping}, {"directions", &opts.directions, &opts.params.Directions},
				{"to-reach", &opts.directions, &opts.params.Directions},
				{"description", &opts.description, &opts.params.Description},
				{"position-source", &opts.posSource, &opts.params.PositionSource},
			} {
				if fl.Changed(x.flag) {
					*x.dst = x.val
				}
			}
			if fl.Changed("lat") {
				opts.params.Lat = &opts.lat
			}
			if fl.Changed("lon") {
				opts.params.Lon = &opts.lon
			}
			return dispatch(opts, runF, markEditRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.typ, "type", "", "kind of mark, e.g. \"bronze disk\"")
	fl.StringVar(&opts.setting, "setting", "", "what it is set in, e.g. \"concrete post\"")
	fl.StringVar(&opts.stamping, "stamping", "", "what is stamped on it")
	addDirectionsFlags(fl, &opts.directions, &opts.toReach)
	fl.StringVar(&opts.description, "description", "", "what the mark is and what is around it, in words")
	fl.Float64Var(&opts.lat, "lat", 0, "approximate latitude, decimal degrees (north positive)")
	fl.Float64Var(&opts.lon, "lon", 0, "approximate longitude, decimal degrees (east positive)")
	fl.StringVar(&opts.posSource, "position-source", "", "where the position came from (e.g. \"scaled from the 1961 sketch\")")
	fl.StringVar(&opts.params.Reason, "reason", "", "why the description changes (required)")
	fl.StringVar(&opts.params.By, "by", osUser(), "who changes it")
	return cmd
}

// markEditRun writes the new version.
func markEditRun(opts *markEditOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	e, err := r.MarkEdit(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	opts.f.IO.printf("recorded version %d of the description of %s\n", e.Version, e.Mark.Designation)
	return nil
}

// markAliasOptions are the inputs of `cairn mark alias`.
type markAliasOptions struct {
	f      *Factory
	ctx    context.Context
	params register.MarkAliasParams
}

func newCmdMarkAlias(f *Factory, runF func(*markAliasOptions) error) *cobra.Command {
	opts := &markAliasOptions{f: f}
	cmd := &cobra.Command{
		Use:   "alias DESIGNATION ALIAS --kind agency|former|stamped [--agency NAME]",
		Short: "Give a benchmark another name: another agency's number, a former designation, its stamping",
		Long: `Give a benchmark another name. Every command that looks up a mark finds it
by any of its aliases too, in any case. An alias is one name once case and
character forms are folded, as a designation is, and is never the
designation of any mark: the database refuses both.

--kind agency is another agency's number for the mark (name the agency with
--agency); former, a designation the mark had before; stamped, what is
stamped on it, as a name to find it by.`,
		Example: `  cairn mark alias TC-0412 "MR 17" --kind agency --agency "Mere River Drainage Board"
  cairn mark alias TC-0412 "TC 0412 1961" --kind stamped`,
		Args: exactArgs(2, "a DESIGNATION and an ALIAS"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation, opts.params.Alias = cmd.Context(), args[0], args[1]
			return dispatch(opts, runF, markAliasRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.params.Kind, "kind", "", "agency, former or stamped (required)")
	fl.StringVar(&opts.params.Agency, "agency", "", "with --kind agency: whose number it is")
	fl.StringVar(&opts.params.Note, "note", "", "anything more to say of the name")
	fl.StringVar(&opts.params.By, "by", osUser(), "who gives the alias")
	return cmd
}

// markAliasRun records the alias.
func markAliasRun(opts *markAliasOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	m, err := r.MarkAliasAdd(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	opts.f.IO.printf("%s is now also known as %s\n", m.Designation, opts.params.Alias)
	return nil
}

// markRetireOptions are the inputs of `cairn mark retire` and `cairn mark
// replace`.
type markRetireOptions struct {
	f        *Factory
	ctx      context.Context
	params   register.MarkRetireParams
	on       string
	add      register.MarkAddParams // the replacement (mark replace)
	lat, lon float64
	toReach  string
}

// dates parses --on into params.On, and sets params.Today.
func (o *markRetireOptions) dates() error {
	now := time.Now()
	o.params.Today = time.Date(now.Year(), now.Month(), now.Day(), 0, 0, 0, 0, time.UTC)
	o.params.On = o.params.Today
	if o.on != "" {
		d, err := time.Parse("2006-01-02", o.on)
		if err != nil {
			return badInput("on: %q is not a date (write 2024-05-14)", o.on)
		}
		o.params.On = d
	}
	return nil
}

func addRetireFlags(cmd *cobra.Command, opts *markRetireOptions) {
	fl := cmd.Flags()
	fl.StringVar(&opts.params.Reason, "reason", "", "why the mark is retired (required)")
	fl.StringVar(&opts.on, "on", "", "date the mark went out of use, YYYY-MM-DD (default today)")
	fl.StringVar(&opts.params.By, "by", osUser(), "who retires it")
}

func newCmdMarkRetire(f *Factory, runF func(*markRetireOptions) error) *cobra.Command {
	opts := &markRetireOptions{f: f}
	cmd := &cobra.Command{
		Use:   "retire DESIGNATION --reason TEXT [--on DATE]",
		Short: "Retire a benchmark for good (its designation is never used again)",
		Long: `Retire a benchmark for good: it keeps its designation, which is never given
to another mark, its record and its heights, shown as those of a retired
mark. A retired mark is never held as control (adjust --hold, run record
--hold refuse it) and gets no new height but a correction or a withdrawal.
To put a new mark in its place, use 'cairn mark replace'. Retiring needs the
publisher's role.`,
		Example: `  cairn mark retire TC-0415 --reason "post destroyed by road widening" --on 2024-05-14`,
		Args:    exactArgs(1, "a DESIGNATION"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation = cmd.Context(), args[0]
			if err := opts.dates(); err != nil {
				return err
			}
			return dispatch(opts, runF, markRetireRun)
		},
	}
	addRetireFlags(cmd, opts)
	return cmd
}

func newCmdMarkReplace(f *Factory, runF func(*markRetireOptions) error) *cobra.Command {
	opts := &markRetireOptions{f: f}
	cmd := &cobra.Command{
		Use:   "replace OLD NEW --reason TEXT [--on DATE] [--type ... --directions ... --lat ... --lon ...]",
		Short: "Replace a benchmark by a new one with a new designation",
		Long: `Retire the mark OLD and add the mark NEW in its place, in one transaction:
NEW is a new mark with a designation of its own (a designation is never
reused), linked to OLD, and 'cairn mark show' of either names the other.
NEW has no height until it is levelled and published; OLD is retired as
'cairn mark retire' does. Needs the publisher's role.`,
		Example: `  cairn mark replace TC-0415 TC-0415A --reason "post destroyed by road widening; new disk set 3 m east" \
    --type "bronze disk" --setting "concrete post" --directions "3 m east of the old post, Mere River road"`,
		Args: exactArgs(2, "the OLD and the NEW designation"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.params.Designation, opts.add.Designation = cmd.Context(), args[0], args[1]
			if err := opts.dates(); err != nil {
				return err
			}
			if err := directionsFlag(cmd, f.IO, &opts.add.Directions, opts.toReach); err != nil {
				return err
			}
			if cmd.Flags().Changed("lat") {
				opts.add.Lat = &opts.lat
			}
			if cmd.Flags().Changed("lon") {
				opts.add.Lon = &opts.lon
			}
			opts.add.CreatedBy = opts.params.By
			opts.params.Replacement = &opts.add
			return dispatch(opts, runF, markRetireRun)
		},
	}
	addRetireFlags(cmd, opts)
	fl := cmd.Flags()
	fl.StringVar(&opts.add.Type, "type", "", "the new mark's kind, e.g. \"bronze disk\"")
	fl.StringVar(&opts.add.Setting, "setting", "", "what the new mark is set in")
	fl.StringVar(&opts.add.Stamping, "stamping", "", "what is stamped on the new mark")
	addDirectionsFlags(fl, &opts.add.Directions, &opts.toReach)
	fl.Float64Var(&opts.lat, "lat", 0, "the new mark's approximate latitude, decimal degrees")
	fl.Float64Var(&opts.lon, "lon", 0, "the new mark's approximate longitude, decimal degrees")
	return cmd
}

// markRetireRun retires the mark, and adds its replacement.
func markRetireRun(opts *markRetireOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	out, err := r.MarkRetire(opts.ctx, opts.params)
	if err != nil {
		return err
	}
	if out.Replacement != nil {
		opts.f.IO.printf("retired mark %s on %s, replaced by new mark %s (no height yet: level it and publish)\n",
			out.Mark.Designation, opts.params.On.Format("2006-01-02"), out.Replacement.Designation)
		return nil
	}
	opts.f.IO.printf("retired mark %s on %s\n", out.Mark.Designation, opts.params.On.Format("2006-01-02"))
	return nil
}

// markPhotoOptions are the inputs of `cairn mark photo`.
type markPhotoOptions struct {
	f           *Factory
	ctx         context.Context
	designation string
	id          int64
	out         string
}

func newCmdMarkPhoto(f *Factory, runF func(*markPhotoOptions) error) *cobra.Command {
	opts := &markPhotoOptions{f: f}
	cmd := &cobra.Command{
		Use:   "photo DESIGNATION PHOTO --out FILE",
		Short: "Write a photograph kept with a condition report to a file, byte for byte",
		Long: `Write photograph PHOTO (its number, as mark show lists it) of one of the
mark's condition reports to FILE, exactly as it was given, and check it
against its SHA-256. FILE must not exist; --out - writes to stdout.`,
		Example: `  cairn mark photo TC-0412 3 --out TC-0412-close-up.jpg`,
		Args:    exactArgs(2, "a DESIGNATION and a PHOTO number"),
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx, opts.designation = cmd.Context(), args[0]
			id, err := strconv.ParseInt(strings.TrimSpace(args[1]), 10, 64)
			if err != nil || id <= 0 {
				return badInput("PHOTO: %q is not a photograph's number (mark show lists them)", args[1])
			}
			opts.id = id
			if strings.TrimSpace(opts.out) == "" {
				return badInput("out: name the file to write (or - for stdout)")
			}
			return dispatch(opts, runF, markPhotoRun)
		},
	}
	cmd.Flags().StringVar(&opts.out, "out", "", "the file to write (it must not exist), or - for stdout")
	return cmd
}

// markPhotoRun writes the photograph.
func markPhotoRun(opts *markPhotoOptions) error {
	r, err := openRegister(opts.ctx, opts.f)
	if err != nil {
		return err
	}
	p, content, err := r.MarkPhoto(opts.ctx, opts.designation, opts.id)
	if err != nil {
		return err
	}
	if sum := sha256.Sum256(content); !bytes.Equal(sum[:], p.SHA256) {
		return fmt.Errorf("photograph %d of %s does not match its SHA-256 as kept: the register's copy is damaged (run cairn audit verify)", p.ID, opts.designation)
	}
	if opts.out == "-" {
		_, err := opts.f.IO.Out.Write(content)
		return err
	}
	f, err := os.OpenFile(opts.out, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return badInput("out: %v", err)
	}
	if _, err := f.Write(content); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", opts.out, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("write %s: %w", opts.out, err)
	}
	opts.f.IO.printf("wrote %s: %s, %d bytes, sha256 %s\n", opts.out, p.FileName, len(content), hex.EncodeToString(p.SHA256))
	return nil
}
