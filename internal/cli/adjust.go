package cli

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"time"

	"github.com/spf13/cobra"

	"cairn/internal/adjust"
	"cairn/internal/netfile"
	"cairn/internal/units"
)

type adjustOptions struct {
	IO  *IOStreams
	ctx context.Context

	Runs []string // register form (not offline)
	// Register holds the options of the register form (RUN... --hold).
	Register adjustRegisterOptions

	SectionsPath string
	HeldPath     string
	OutPath      string
	Format       Format

	SigmaMMPerSqrtKm float64
	Alpha            float64
	SnoopCritical    float64
	Snooping         string // per-observation or family
	snooping         adjust.Snooping
	Minimal          bool
	Timings          bool
}

func newCmdAdjust(f *Factory, runF func(*adjustOptions) error) *cobra.Command {
	opts := &adjustOptions{IO: f.IO, Register: adjustRegisterOptions{f: f}}
	cmd := &cobra.Command{
		Use:   "adjust RUN... [--marks MARK,... | --area LAT,LON --within D] --hold MARK... [--hold-weighted MARK=SD_MM...] | adjust --sections FILE.csv --held FILE.csv",
		Short: "Adjust recorded runs against held control, or a network from files",
		Long: adjustRegisterLong + `

With --sections and --held instead of runs, a leveling network is adjusted
by weighted least squares, read from files in the exchange format, and no
register is opened:

  sections: from,to,dh_m,length_km   (dh_m = height(to) - height(from))
  held:     point,height_m[,sd_m]    (sd_m > 0 holds a mark weighted)

Each section weighs 1/length; sigma is the a-priori standard deviation of
one kilometre. The result is one row per point: its adjusted height and its
standard deviation (from the a-priori sigma), in metres. The variance factor
with its chi-square test and the sections flagged by data snooping are
reported on stderr (or in the json output), with the number chance alone
would flag (--snooping, as for recorded runs); the exit status is 3 when the
test fails or a section is flagged under the --snooping asked for.

` + adjustCautions,
		Example: `  cairn adjust 1 --hold TC-0412
  cairn adjust 2 --hold TC-0420,TC-0427 --distribute setups --dry-run
  cairn adjust 1 2 3 --method least-squares --hold TC-0412 --hold-weighted TC-0427=5
  cairn adjust --marks TC-0412,TC-0415 --method least-squares --hold TC-0412 --minimal
  cairn adjust --area 41.62,-97.95 --within 5km --method least-squares --hold TC-0412
  cairn adjust --sections net.csv --held held.csv -o json`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			opts.ctx = cmd.Context()
			if err := opts.parse(cmd, args); err != nil {
				return err
			}
			return dispatch(opts, runF, adjustRun)
		},
	}
	fl := cmd.Flags()
	fl.StringVar(&opts.SectionsPath, "sections", "", "sections file (from,to,dh_m,length_km); adjusts offline, without the register")
	fl.StringVar(&opts.HeldPath, "held", "", "held marks file (point,height_m[,sd_m])")
	fl.StringVar(&opts.OutPath, "out", "", "write the heights to this file as csv instead of to stdout")
	fl.Float64Var(&opts.SigmaMMPerSqrtKm, "sigma-mm-per-sqrt-km", adjust.DefaultSigmaM*1000, "a-priori standard deviation of leveling, mm per square root of km")
	fl.Float64Var(&opts.Alpha, "alpha", adjust.DefaultAlpha, "significance level of the chi-square test of the variance factor")
	fl.Float64Var(&opts.SnoopCritical, "snoop-critical", adjust.DefaultSnoopCritical, "critical value of data snooping (3.29: alpha = 0.001)")
	fl.StringVar(&opts.Snooping, "snooping", "per-observation", "what the level of data snooping applies to: per-observation (each section) or family (the whole network, Šidák)")
	fl.BoolVar(&opts.Minimal, "minimal", false, "least squares: hold only the first held mark (minimally constrained) and report how far the others are")
	fl.BoolVar(&opts.Timings, "timings", false, "print the time of each phase on stderr")
	addOutputFlag(cmd, &opts.Format)
	opts.Register.flags(cmd)
	return cmd
}

// parse fills and checks the options of either form from the flags and
// args.
func (opts *adjustOptions) parse(cmd *cobra.Command, args []string) error {
	opts.Runs = args
	sn, err := adjust.ParseSnooping(opts.Snooping)
	if err != nil {
		return badInput("snooping: %v", err)
	}
	opts.snooping = sn
	if opts.SectionsPath == "" {
		reg := &opts.Register
		if len(args) == 0 && opts.HeldPath == "" && !reg.holds() && len(reg.params.Marks) == 0 && reg.area == "" {
			return badInput("give --sections FILE.csv and --held FILE.csv, or RUN numbers with --hold (see 'cairn adjust --help')")
		}
		if opts.HeldPath != "" {
			return badInput("--held needs --sections (to hold marks of recorded runs, use --hold)")
		}
		opts.Register.format = opts.Format
		if err := opts.Register.parse(cmd, args); err != nil {
			return err
		}
		if opts.Register.params.Method == adjust.MethodLeastSquares {
			o := &opts.Register.params.LeastSquares
			o.SigmaM, o.Alpha, o.SnoopCritical, o.Snooping, o.Minimal = opts.SigmaMMPerSqrtKm/1000, opts.Alpha, opts.SnoopCritical, opts.snooping, opts.Minimal
			if err := checkNetworkOptions(*o); err != nil {
				return err
			}
		}
		return nil
	}
	if opts.Register.holds() {
		return badInput("--hold goes with RUN numbers; with --sections, give the held marks in --held")
	}
	for _, name := range []string{"marks", "marks-file", "area", "within", "weight", "method", "by", "made-by", "distribute", "datum", "dry-run"} {
		if cmd.Flags().Changed(name) {
			return badInput("%s: --%s goes with RUN numbers, not with --sections", name, name)
		}
	}
	if len(args) > 0 {
		return badInput("--sections adjusts a network from files; do not name runs as well")
	}
	if opts.HeldPath == "" {
		return badInput("--sections needs --held FILE.csv")
	}
	if err := checkNetworkOptions(opts.networkOptions()); err != nil {
		return err
	}
	return nil
}

// adjustRun adjusts recorded runs in the register, or a network from files.
func adjustRun(opts *adjustOptions) error {
	if opts.SectionsPath != "" {
		return adjustFilesRun(opts)
	}
	return adjustRegisterRun(opts.ctx, &opts.Register)
}

// networkOptions are the least-squares settings of the offline form.
func (opts *adjustOptions) networkOptions() adjust.NetworkOptions {
	return adjust.NetworkOptions{SigmaM: opts.SigmaMMPerSqrtKm / 1000, Alpha: opts.Alpha,
		SnoopCritical: opts.SnoopCritical, Snooping: opts.snooping, Minimal: opts.Minimal}
}

// networkFlags are the flags of adjust.NetworkOptions' settings.
var networkFlags = map[string]string{"weighting": "weight", "sigma_m": "sigma-mm-per-sqrt-km", "alpha": "alpha", "snoop_critical": "snoop-critical", "snooping": "snooping"}

// checkNetworkOptions checks least-squares settings (adjust.NetworkOptions.
// Validate, where they are checked), naming the flag at fault.
func checkNetworkOptions(o adjust.NetworkOptions) error {
	var oe *adjust.OptionError
	if err := o.Validate(); errors.As(err, &oe) {
		v := oe.Value
		if oe.Field == "sigma_m" {
			v *= 1000 // given in millimetres
		}
		return badInput("--%s must %s, not %v", networkFlags[oe.Field], oe.Must, v)
	}
	return nil
}

// progress shows the current phase of an adjustment on a terminal: a
// spinner with the phase and the time elapsed (IOStreams.StartBar; the
// solve has no count to report).
type progress struct{ bar *Bar }

func startProgress(ios *IOStreams) *progress {
	return &progress{bar: ios.StartBar(-1, "adjusting", "steps")}
}

func (p *progress) set(phase string) { p.bar.Describe("adjusting: " + phase) }

func (p *progress) end() { p.bar.Finish() }

func adjustFilesRun(opts *adjustOptions) error {
	ios := opts.IO
	prog := startProgress(ios)
	defer prog.end()
	var timings [][2]any
	lap := func(name string, t0 time.Time) { timings = append(timings, [2]any{name, time.Since(t0)}) }

	prog.set("reading")
	t0 := time.Now()
	held, err := readHeld(opts.HeldPath)
	if err != nil {
		return err
	}
	f, err := os.Open(opts.SectionsPath)
	if err != nil {
		return badInput("open sections: %v", err)
	}
	defer f.Close()
	size := 1 << 12
	if st, err := f.Stat(); err == nil {
		size = int(st.Size() / 30) // about 30 bytes a line
	}
	net := adjust.NewNetwork(size)
	var lines []int32
	if err := netfile.ReadSections(f, opts.SectionsPath, func(s adjust.Section, line int) {
		net.AddSection(s)
		lines = append(lines, int32(line))
	}); err != nil {
		return flagError{err}
	}
	for _, h := range held {
		net.AddHeld(h.HeldMark)
	}
	lap("read", t0)

	o := opts.networkOptions()
	o.Progress = prog.set
	sol, err := adjust.SolveNetwork(net, o)
	if err != nil {
		return inputError(err, opts, lines, held)
	}
	tm := sol.Stats.Timings
	timings = append(timings, [2]any{"reduce", tm.Reduce}, [2]any{"order", tm.Order}, [2]any{"factor", tm.Factor},
		[2]any{"solve", tm.Solve}, [2]any{"inverse", tm.Inverse}, [2]any{"back substitution", tm.Back})

	if err := adjust.CheckPoints(sol.Points); err != nil {
		return badInput("%s: %v; nothing was written (check the sections and the held heights)", opts.SectionsPath, err)
	}

	prog.set("writing")
	t0 = time.Now()
	if opts.OutPath != "" {
		out, err := os.Create(opts.OutPath)
		if err != nil {
			return fmt.Errorf("create %s: %w", opts.OutPath, err)
		}
		if err := netfile.WriteHeights(out, sol.Points); err != nil {
			out.Close()
			return fmt.Errorf("write %s: %w", opts.OutPath, err)
		}
		if err := out.Close(); err != nil {
			return fmt.Errorf("write %s: %w", opts.OutPath, err)
		}
	} else if err := writeAdjustment(ios, opts, sol, net, lines); err != nil {
		return err
	}
	lap("write", t0)
	prog.end()

	if opts.Format != FormatJSON || opts.OutPath != "" {
		writeAdjustReport(ios.ErrOut, sol, opts, lines)
	}
	if opts.Timings {
		fmt.Fprintf(ios.ErrOut, "junction system: %d unknowns, %d entries in its factor\n", sol.Stats.Junctions, sol.Stats.FactorNNZ)
		for _, t := range timings {
			fmt.Fprintf(ios.ErrOut, "%-18s %8.3f s\n", t[0], t[1].(time.Duration).Seconds())
		}
	}
	if n := adjust.NetworkStatOf(sol).Failed(); n > 0 {
		return checksFailed{n}
	}
	return nil
}

func readHeld(path string) ([]netfile.HeldRow, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, badInput("open held marks: %v", err)
	}
	defer f.Close()
	rows, err := netfile.ReadHeld(f, path)
	if err != nil {
		return nil, flagError{err}
	}
	return rows, nil
}

// inputError names the file and line behind an adjustment's data error.
func inputError(err error, opts *adjustOptions, lines []int32, held []netfile.HeldRow) error {
	var se *adjust.SectionError
	var he *adjust.HeldError
	var ue *adjust.UncontrolledError
	switch {
	case errors.As(err, &se):
		return badInput("%s:%d: %s: %v", opts.SectionsPath, lines[se.Index], se.Field, se.Err)
	case errors.As(err, &he):
		return badInput("%s:%d: %s: %v", opts.HeldPath, held[he.Index].Line, he.Field, he.Err)
	case errors.As(err, &ue), errors.Is(err, adjust.ErrEmptyNetwork):
		return badInput("%s: %v", opts.SectionsPath, err)
	}
	return err
}

type adjustJSON struct {
	Statistics adjustStatsJSON `json:"statistics"`
	Points     []pointJSON     `json:"points"`
	Flagged    []flaggedJSON   `json:"flagged_sections"`
}

// adjustStatsJSON is the offline adjustment's statistics: those the
// register stores for a least-squares draft, and the a-priori σ used.
type adjustStatsJSON struct {
	*adjust.NetworkStat
	SigmaMM float64 `json:"sigma_mm_per_sqrt_km"`
}

type pointJSON struct {
	Point   string  `json:"point"`
	HeightM float64 `json:"height_m"`
	SDM     float64 `json:"sd_m"`
	Held    bool    `json:"held"`
}

type flaggedJSON struct {
	Line      int     `json:"line"`
	From      string  `json:"from"`
	To        string  `json:"to"`
	ResidualM float64 `json:"residual_m"`
	W         float64 `json:"w"`
}

// flagged returns the flagged sections, largest |W| first.
func flagged(sol *adjust.NetworkSolution) []int {
	return adjust.LargestWFirst(len(sol.Sections),
		func(i int) bool { return sol.Sections[i].Flagged },
		func(i int) float64 { return sol.Sections[i].W })
}

func writeAdjustment(ios *IOStreams, opts *adjustOptions, sol *adjust.NetworkSolution, net *adjust.Network, lines []int32) error {
	switch opts.Format {
	case FormatCSV:
		return netfile.WriteHeights(ios.Out, sol.Points)
	case FormatJSON:
		v := adjustJSON{
			Statistics: adjustStatsJSON{adjust.NetworkStatOf(sol), opts.SigmaMMPerSqrtKm},
			Points:     make([]pointJSON, len(sol.Points)),
			Flagged:    []flaggedJSON{},
		}
		for i, p := range sol.Points {
			v.Points[i] = pointJSON{p.Point, round6(p.HeightM), round6(p.SDM), p.Held}
		}
		for _, i := range flagged(sol) {
			from, to := net.SectionPoints(i)
			r := sol.Sections[i]
			v.Flagged = append(v.Flagged, flaggedJSON{int(lines[i]), from, to, round6(r.ResidualM), math.Round(r.W*100) / 100})
		}
		return writeJSON(ios.Out, v)
	}
	return render(ios, opts.Format, nil, func() Table {
		t := Table{Headers: []string{"POINT", "HEIGHT (m)", "SD (m)"}}
		for _, p := range sol.Points {
			t.AddRow(p.Point, units.Format(p.HeightM, 4), units.Format(p.SDM, 4))
		}
		return t
	})
}

func round6(v float64) float64 { return math.Round(v*1e6) / 1e6 }

// writeAdjustReport prints the statistics and the flagged sections.
func writeAdjustReport(w io.Writer, sol *adjust.NetworkSolution, opts *adjustOptions, lines []int32) {
	st := sol.Stats
	fmt.Fprintf(w, "%d points, %d observations, %d unknowns, redundancy %d (sigma %.3g mm/sqrt(km))\n",
		len(sol.Points), st.Observations, st.Unknowns, st.Redundancy, opts.SigmaMMPerSqrtKm)
	if st.Redundancy > 0 {
		c := st.ChiSquare
		fmt.Fprintln(w, chiSquareLine(c.Statistic, st.VarianceFactor, st.Redundancy, c.Alpha, c.Lower, c.Upper, c.Pass))
	} else {
		fmt.Fprintln(w, noRedundancyLine)
	}
	idx := flagged(sol)
	fmt.Fprintln(w, snoopingLine(adjust.NetworkStatOf(sol), len(idx)))
	const show = 20
	for k, i := range idx {
		if k == show {
			fmt.Fprintf(w, "  ... and %d more\n", len(idx)-show)
			break
		}
		r := sol.Sections[i]
		fmt.Fprintf(w, "  %s line %d: residual %+.4f m, w %+.2f\n", opts.SectionsPath, lines[i], r.ResidualM, r.W)
	}
}
