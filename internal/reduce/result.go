// Package reduce reduces a parsed level book: rod readings to heights of
// instrument and point heights (the height-of-instrument method), setups
// with their sight lengths and imbalances, sections between consecutive
// marks, misclosures of the loop or between held marks, and the quality
// checks of the run's accuracy class.
//
// Every number is carried in float64 metres; Decimals gives the places to
// show in the run's unit. Sign conventions:
//
//	height of instrument  HI = H(backsight point) + BS
//	height of a point     H  = HI − FS   (or HI − IS)
//	difference of a setup dH = BS − FS   (positive uphill)
//	misclosure            m  = observed difference − known difference
//
// so a positive misclosure means the run came out high.
package reduce

import (
	"cairn/internal/levelbook"
	"cairn/internal/standards"
	"cairn/internal/units"
)

// Options control a reduction. The zero value reduces the book as written,
// with heights relative to its first mark.
type Options struct {
	// Hold gives known heights in metres by mark name. A loop closes on
	// itself held or not; a line is checked between each two held marks
	// in the order it reaches them. Heights are computed from the first held
	// mark the run reaches (or from 0 on the first mark when none is held).
	Hold map[string]float64
	// Class overrides the book's accuracy class; empty keeps the book's.
	Class standards.Class
	// Standards is the profile whose tolerances judge the run; nil for the
	// default profile (standards.Default). The caller resolves the book's
	// "# standards:" line or its own flag (standards.Resolve).
	Standards *standards.Profile
	// Published gives the known heights in metres of marks not held (their
	// published heights): they hold nothing, and serve only the check
	// connections, with the held marks.
	Published map[string]float64
	// CurvatureRefraction corrects every reading for the curvature of the
	// earth and atmospheric refraction (CurvatureRefractionM); every sight
	// must then have a distance.
	CurvatureRefraction bool
}

// Result is a reduced level book.
type Result struct {
	// Name is the book's name (its file).
	Name string `json:"name"`
	// Meta is the book's description of the run.
	Meta levelbook.Meta `json:"meta"`
	// Unit is the book's unit, in which results are shown.
	Unit units.Unit `json:"unit"`
	// Class is the accuracy class checked against (Options.Class, else the
	// book's); empty when neither names one, and then Tolerances is nil
	// and only the class-free checks are made.
	Class      standards.Class       `json:"class,omitempty"`
	Tolerances *standards.Tolerances `json:"tolerances,omitempty"`
	// Standards names the profile that judged the run, with its version.
	Standards standards.Ref `json:"standards"`
	// Reading is the reading mode used.
	Reading levelbook.ReadingMode `json:"reading"`
	// CurvatureRefraction says whether readings were corrected.
	CurvatureRefraction bool `json:"curvature_refraction"`
	// Start and End are the first and last marks of the run; Loop says
	// whether they are the same mark.
	Start string `json:"start"`
	End   string `json:"end"`
	Loop  bool   `json:"loop"`
	// Held are the held heights used, in metres.
	Held map[string]float64 `json:"held_m,omitempty"`
	// Relative is set when no mark is held: heights are then relative to
	// Start at 0.
	Relative bool `json:"relative"`
	// Rows are the reduced notes, one per sighting in field order.
	Rows []Row `json:"rows"`
	// Setups are the instrument setups in field order.
	Setups []Setup `json:"setups"`
	// Sections are the observations between consecutive marks of the line,
	// in field order.
	Sections []Section `json:"sections"`
	// Misclosures are the closures of the run: the loop on itself, each
	// stretch between consecutive held marks, and each stretch that comes
	// back to a mark the run passed (Misclosure.Within).
	Misclosures []Misclosure `json:"misclosures"`
	// DoubleRuns are the sections levelled both ways, forward + backward
	// compared with the section tolerance; those against another run's
	// sections are added by CompareOtherRuns.
	DoubleRuns []DoubleRun `json:"double_runs"`
	// Connections are the check connections: every two marks of known
	// height (held, or published: Options.Published) the run ties to.
	Connections []Connection `json:"check_connections"`
	// SpotHeights are the reduced spot heights (points declared `spot` in
	// the book), in field order.
	SpotHeights []SpotHeight `json:"spot_heights"`
	// HeldSights are the intermediate sights on held marks, in field
	// order, each compared with the mark's held height.
	HeldSights []HeldSight `json:"held_sights"`
	// Checks summarise each kind of quality check; Failures list every
	// failed check with its line.
	Checks   []Check   `json:"checks"`
	Failures []Failure `json:"failures"`
	// Summary says in one sentence how the checks came out: which failed,
	// or how many were made and passed, and which were not made and why
	// (see Result.summarize). "All checks passed." only when every check
	// that applies to the book was made and passed.
	Summary string `json:"summary"`
	// AllChecksMade reports that every check that applies to the book was
	// made (a class, sight lengths and a closure were there to check).
	AllChecksMade bool `json:"all_checks_made"`
	// Book is the book reduced.
	Book *levelbook.Book `json:"-"`

	// anchorAt is the row the heights are computed from (before the
	// shift), when anchored.
	anchorAt Row
	anchored bool
	// The reduction of a book read a sighting at a time (ReduceScan),
	// which keeps no rows or setups: the checks of its rows and setups
	// made as they came, its intermediate sights, and each setup's sight
	// lengths.
	rc       *rowCheck
	sideRows []Row
	lens     []setupLen
	// shiftM is what the held height added to every height computed from
	// the first sighting's (ScanRows adds it again).
	shiftM float64
}

// setupLen is what a held sight needs of a setup: its sight lengths.
type setupLen struct {
	back, fore float64
	has        bool
}

// Passed reports whether every check passed.
func (r *Result) Passed() bool { return len(r.Failures) == 0 }

// Row is one reduced sighting.
type Row struct {
	// Line is the sighting's line in the book.
	Line int `json:"line"`
	// Index is the sighting's position in Book.Sightings.
	Index int `json:"index"`
	// Setup is the 1-based number of the setup the sighting belongs to.
	Setup        int             `json:"setup"`
	Point        string          `json:"point"`
	Sight        levelbook.Sight `json:"sight"`
	TurningPoint bool            `json:"turning_point"`
	// Spot says the point is a spot height (levelbook.Sighting.Spot).
	Spot bool `json:"spot"`
	// ReadingM is the rod reading used, after any curvature-and-refraction
	// correction; CorrectionM is the correction subtracted (0 without it).
	ReadingM    float64 `json:"reading_m"`
	CorrectionM float64 `json:"correction_m"`
	// DistanceM is the sight length; meaningful when HasDistance.
	DistanceM   float64 `json:"distance_m"`
	HasDistance bool    `json:"has_distance"`
	// HeightOfInstrumentM is the setup's height of instrument.
	HeightOfInstrumentM float64 `json:"height_of_instrument_m"`
	// HeightM is the height of the point: known for a backsight, computed
	// for an intermediate sight or foresight.
	HeightM float64 `json:"height_m"`
	Note    string  `json:"note,omitempty"`
}

// Setup is one instrument setup: a backsight, its intermediate sights and a
// foresight.
type Setup struct {
	// Number is the setup's 1-based number in the run.
	Number int `json:"setup"`
	// Back, Fore and Intermediate index Rows.
	Back         int   `json:"back"`
	Fore         int   `json:"fore"`
	Intermediate []int `json:"intermediate,omitempty"`
	// BackPoint and ForePoint name the points; BackLine and ForeLine give
	// their lines.
	BackPoint string `json:"back_point"`
	ForePoint string `json:"fore_point"`
	BackLine  int    `json:"back_line"`
	ForeLine  int    `json:"fore_line"`
	// BacksightM and ForesightM are the readings used.
	BacksightM float64 `json:"backsight_m"`
	ForesightM float64 `json:"foresight_m"`
	// HeightOfInstrumentM is H(back point) + BacksightM.
	HeightOfInstrumentM float64 `json:"height_of_instrument_m"`
	// ForeHeightM is the height of the foresight point.
	ForeHeightM float64 `json:"fore_height_m"`
	// DifferenceM is BacksightM − ForesightM.
	DifferenceM float64 `json:"difference_m"`
	// BackDistanceM and ForeDistanceM are the sight lengths, meaningful
	// when HasDistances (both sights have one).
	BackDistanceM float64 `json:"back_distance_m"`
	ForeDistanceM float64 `json:"fore_distance_m"`
	HasDistances  bool    `json:"has_distances"`
	// ImbalanceM is BackDistanceM − ForeDistanceM; AccumulatedImbalanceM
	// sums it over the setups since the last mark, this one included.
	ImbalanceM            float64 `json:"imbalance_m"`
	AccumulatedImbalanceM float64 `json:"accumulated_imbalance_m"`
	// Section is the 1-based number of the section the setup belongs to.
	Section int `json:"section"`
}

// Section is the observation between two consecutive marks of the line.
type Section struct {
	// Number is the section's 1-based number in the run.
	Number int    `json:"section"`
	From   string `json:"from"`
	To     string `json:"to"`
	// FromLine is the line of the backsight on From; ToLine the line of the
	// foresight on To.
	FromLine int `json:"from_line"`
	ToLine   int `json:"to_line"`
	// FirstSetup and LastSetup are the 1-based numbers of its setups.
	FirstSetup int `json:"first_setup"`
	LastSetup  int `json:"last_setup"`
	// Setups is the number of setups.
	Setups int `json:"setups"`
	// DifferenceM is the observed height difference H(To) − H(From).
	DifferenceM float64 `json:"difference_m"`
	// LengthM is the sum of backsight and foresight lengths (intermediate
	// sights excluded); meaningful when HasLength (every setup has both
	// distances).
	LengthM   float64 `json:"length_m"`
	HasLength bool    `json:"has_length"`
	// CumulativeLengthM is the length of the run from its start to To;
	// CumulativeSetups the number of setups.
	CumulativeLengthM float64 `json:"cumulative_length_m"`
	CumulativeSetups  int     `json:"cumulative_setups"`
	// ImbalanceM is the backsight − foresight length difference
	// accumulated over the section.
	ImbalanceM float64 `json:"imbalance_m"`
	// FromHeightM and ToHeightM are the computed heights of its marks.
	FromHeightM float64 `json:"from_height_m"`
	ToHeightM   float64 `json:"to_height_m"`
}

// Misclosure is the closure of one stretch of the run: a loop on itself or
// the line between two held marks.
type Misclosure struct {
	// Kind is "loop" (From = To) or "line".
	Kind string `json:"kind"`
	From string `json:"from"`
	To   string `json:"to"`
	// FromLine and ToLine are the lines where the stretch begins (the
	// backsight on From) and ends (the foresight on To).
	FromLine int `json:"from_line"`
	ToLine   int `json:"to_line"`
	// FirstSection and LastSection are the 1-based numbers of its sections.
	FirstSection int `json:"first_section"`
	LastSection  int `json:"last_section"`
	// ObservedM is the observed difference H(To) − H(From); KnownM the held
	// difference (0 for a loop); MisclosureM = ObservedM − KnownM.
	ObservedM   float64 `json:"observed_m"`
	KnownM      float64 `json:"known_m"`
	MisclosureM float64 `json:"misclosure_m"`
	// LengthM and Setups measure the stretch; LengthM is meaningful when
	// HasLength.
	LengthM   float64 `json:"length_m"`
	HasLength bool    `json:"has_length"`
	Setups    int     `json:"setups"`
	// AllowableM is the class's allowable misclosure for LengthM;
	// meaningful when HasAllowable (a class and a length are known).
	AllowableM   float64 `json:"allowable_m"`
	HasAllowable bool    `json:"has_allowable"`
	// Pass reports |MisclosureM| ≤ AllowableM (false when not
	// HasAllowable).
	Pass bool `json:"pass"`
	// Within is set on a closure inside the run: the run came back to a
	// mark it had passed (A, B, C, D, B, A closes B, C, D, B). It checks
	// the stretch, not the run's tie to known heights, so it does not
	// count for the closure check.
	Within bool `json:"within,omitempty"`
}

// DoubleRun is a section levelled forward and backward, in this book or
// in another run, compared: the two observed differences should sum to
// zero.
type DoubleRun struct {
	// From and To are the marks of the forward section.
	From string `json:"from"`
	To   string `json:"to"`
	// Forward and Backward number the two sections in their runs;
	// ForwardLines and BackwardLines give their book lines. OtherRun is
	// the run the backward section belongs to, 0 for this book.
	Forward       int    `json:"forward_section"`
	Backward      int    `json:"backward_section"`
	ForwardLines  [2]int `json:"forward_lines"`
	BackwardLines [2]int `json:"backward_lines"`
	OtherRun      int64  `json:"other_run,omitempty"`
	// ForwardM is H(To) − H(From) observed forward, BackwardM H(From) −
	// H(To) observed backward; ClosureM = ForwardM + BackwardM.
	ForwardM  float64 `json:"forward_m"`
	BackwardM float64 `json:"backward_m"`
	ClosureM  float64 `json:"closure_m"`
	// OneWayM is the one-way length K, the mean of the two sections'
	// lengths; meaningful when HasLength.
	OneWayM   float64 `json:"one_way_m"`
	HasLength bool    `json:"has_length"`
	// AllowableM is standards.DoubleRunAllowableM over OneWayM; meaningful when
	// HasAllowable. Pass reports |ClosureM| ≤ AllowableM.
	AllowableM   float64 `json:"allowable_m"`
	HasAllowable bool    `json:"has_allowable"`
	Pass         bool    `json:"pass"`
}

// CheckKind names a kind of quality check.
type CheckKind string

// The kinds of check, in the order they are reported.
const (
	CheckThreeWire        CheckKind = "three_wire"        // half-intervals of each three-wire sighting agree
	CheckDistance         CheckKind = "distance"          // each backsight and foresight has a length (class checks need it)
	CheckSightLength      CheckKind = "sight_length"      // no backsight or foresight is longer than the class allows
	CheckSetupImbalance   CheckKind = "setup_imbalance"   // backsight and foresight lengths of a setup agree
	CheckSectionImbalance CheckKind = "section_imbalance" // accumulated imbalance over a section
	CheckMisclosure       CheckKind = "misclosure"        // each closure within the allowable
	CheckHeldSight        CheckKind = "held_sight"        // each intermediate sight on a held mark agrees with its held height
	CheckDoubleRun        CheckKind = "double_run"        // each section levelled both ways: forward + backward within the section tolerance
	CheckConnection       CheckKind = "check_connection"  // each two marks of known height: observed difference within the tolerance of the known one
	CheckClosure          CheckKind = "closure"           // the run closes at all: a loop, or two held marks
)

// Check summarises one kind of check over the run.
type Check struct {
	Kind CheckKind `json:"kind"`
	// Tolerance states the limit in words, in the run's unit.
	Tolerance string `json:"tolerance"`
	// Source cites the limit.
	Source string `json:"source"`
	// Checked and Failed count the items checked and those that failed.
	Checked int `json:"checked"`
	Failed  int `json:"failed"`
	// NotMade says why the check was not made (empty when it was); Why
	// says it in a few words for a summary ("no class").
	NotMade string `json:"not_made,omitempty"`
	Why     string `json:"why_not_made,omitempty"`
	// NotApplicable is set on a check not made because the book has
	// nothing it applies to (no three-wire sighting, no intermediate sight
	// on a held mark): nothing is missing, and the run can still pass all
	// its checks.
	NotApplicable bool `json:"not_applicable,omitempty"`
}

// Words names the kind of check in the words of a summary.
func (k CheckKind) Words() string {
	switch k {
	case CheckThreeWire:
		return "three-wire"
	case CheckDistance:
		return "distances booked"
	case CheckSightLength:
		return "sight lengths"
	case CheckSetupImbalance:
		return "setup imbalance"
	case CheckSectionImbalance:
		return "section imbalance"
	case CheckMisclosure:
		return "misclosure"
	case CheckHeldSight:
		return "held-mark sights"
	case CheckDoubleRun:
		return "double-run sections"
	case CheckConnection:
		return "check connections"
	case CheckClosure:
		return "closure"
	}
	return string(k)
}

// Failure is one failed check.
type Failure struct {
	Kind CheckKind `json:"kind"`
	// Line is the line of the sighting concerned, or the last line of the
	// setup, section or stretch.
	Line int `json:"line"`
	// Subject names what failed: a point, a setup ("setup 4") or a
	// section or stretch ("TC-0412 to TC-0415").
	Subject string `json:"subject"`
	// ValueM and LimitM are the value found and the limit, in metres.
	ValueM float64 `json:"value_m"`
	LimitM float64 `json:"limit_m"`
	// Message says what is wrong, in the run's unit.
	Message string `json:"message"`
}

// Decimals is the number of decimals cairn shows for readings, heights and
// misclosures in unit u: 4 in metres (0.1 mm) and 3 in feet (0.001 ft, about
// 0.3 mm) — one place past the usual reading resolution, so that the
// rounding of a shown figure never hides a millimetre.
func Decimals(u units.Unit) int {
	if u == units.Metre {
		return 4
	}
	return 3
}

// DistanceDecimals is the number of decimals shown for sight and section
// lengths, in any unit.
const DistanceDecimals = 1
