package adjust

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"cairn/internal/sparse"
)

// Section is one observed height difference of a leveling network.
type Section struct {
	From, To string
	// DhM is the observed height(To) − height(From), in metres.
	DhM float64
	// LengthKm is the length levelled, in kilometres (weight 1/LengthKm).
	LengthKm float64
	// Setups is the number of instrument setups (weight 1/Setups); used only
	// with WeightBySetups.
	Setups int
}

// HeldMark is a mark whose height is held in a network adjustment.
type HeldMark struct {
	Point   string
	HeightM float64
	// SigmaM is the standard deviation of the held height in metres: 0 holds
	// the mark fixed; a positive value adds the pseudo-observation
	// height(Point) = HeightM + v with weight σ₀²/SigmaM².
	SigmaM float64
}

// Weighting chooses the cofactor qᵢ of a section, its variance being σ₀²·qᵢ.
type Weighting int

const (
	// WeightByLength takes qᵢ = length in km (common practice): σ₀ is then
	// the standard deviation of one kilometre of leveling.
	WeightByLength Weighting = iota
	// WeightBySetups takes qᵢ = number of setups (Mahun, Least Squares Lite,
	// ch. E): σ₀ is then the standard deviation of one setup.
	WeightBySetups
)

// Network is a leveling network: sections observed between named points and
// the marks held. Points are named by strings and numbered internally in the
// order they first appear. The zero value is an empty network ready for use.
type Network struct {
	pts  names
	secs []netSection
	held []HeldMark
}

type netSection struct {
	from, to int32
	dh, km   float64
	setups   int32
}

// NewNetwork returns an empty network with room for about n sections.
func NewNetwork(n int) *Network {
	net := &Network{secs: make([]netSection, 0, n)}
	net.pts.init(n) // a leveling network has about as many points as sections
	return net
}

// AddSection adds an observed section. Its values are checked by
// SolveNetwork.
func (n *Network) AddSection(s Section) {
	n.secs = append(n.secs, netSection{from: n.pts.intern(s.From), to: n.pts.intern(s.To), dh: s.DhM, km: s.LengthKm, setups: int32(min(s.Setups, math.MaxInt32))})
}

// AddHeld holds a mark. Its values are checked by SolveNetwork.
func (n *Network) AddHeld(h HeldMark) { n.held = append(n.held, h) }

// NumSections returns the number of sections added.
func (n *Network) NumSections() int { return len(n.secs) }

// SectionPoints returns the from and to points of section i (from 0).
func (n *Network) SectionPoints(i int) (from, to string) {
	s := n.secs[i]
	return n.pts.list[s.from], n.pts.list[s.to]
}

// NumPoints returns the number of distinct points named by the sections.
func (n *Network) NumPoints() int { return len(n.pts.list) }

// PointResult is the adjusted height of one point.
type PointResult struct {
	Point   string
	HeightM float64
	// SDM is the a-priori standard deviation of the adjusted height,
	// σ₀·√Q(i, i) in metres; 0 for a mark held fixed.
	SDM  float64
	Held bool // held fixed, or weighted
}

// Residual is the outcome of one observation: a section, or the
// pseudo-observation of a weighted held mark.
type Residual struct {
	// ResidualM is v, in metres: adjusted minus observed.
	ResidualM float64
	// SDM is the standard deviation of the residual, σ₀·√q_vv.
	SDM float64
	// W is Baarda's standardized residual v / (σ₀·√q_vv); NaN when the
	// observation has no redundancy (q_vv = 0: a spur or a bridge of the
	// network), which no test can check.
	W float64
	// Flagged says |W| exceeds the critical value of data snooping.
	Flagged bool
}

// NetworkSolution is the least-squares adjustment of a network.
type NetworkSolution struct {
	// Points in the order the points first appear in the sections.
	Points []PointResult
	// Sections in the order added. Sections in series between two junctions
	// (points of another degree than two, or held) share one W: no test can
	// tell which of them holds a blunder.
	Sections []Residual
	// Held lists, for each held mark in the order added, its residual: zero
	// for a fixed mark, the pseudo-observation's for a weighted one.
	Held  []Residual
	Stats NetworkStats
}

// NetworkStats are the statistics of an adjustment.
type NetworkStats struct {
	Observations int // sections plus weighted held marks
	Unknowns     int // points not held fixed
	Redundancy   int // Observations − Unknowns
	// VTPV is vᵀ·Σ⁻¹·v with Σ = σ₀²·Q the a-priori covariance.
	VTPV float64
	// VarianceFactor is the a-posteriori variance factor ŝ₀²/σ₀² =
	// vᵀΣ⁻¹v / (n − u); NaN without redundancy.
	VarianceFactor float64
	ChiSquare      ChiSquareTest
	// Snooping is what the level of data snooping applied to (options).
	Snooping Snooping
	// SnoopCritical is the critical value each w was tested against, and
	// SnoopLevel the level of each test, 2·(1 − Φ(SnoopCritical)).
	SnoopCritical, SnoopLevel float64
	// SnoopTestable counts the observations with redundancy (a finite w);
	// SnoopTests the distinct tests among them (sections in series share
	// one w).
	SnoopTestable, SnoopTests int
	// SnoopExpected is the number of observations expected to be flagged
	// by chance alone with no blunder, SnoopTestable·SnoopLevel.
	SnoopExpected float64
	Flagged       int // observations with |W| above the critical value
	Junctions     int // unknowns of the reduced (junction) system
	FactorNNZ     int // entries of its Cholesky factor below the diagonal
	Timings       NetworkTimings
}

// NetworkTimings are the wall times of the phases of SolveNetwork.
type NetworkTimings struct {
	Reduce, Order, Factor, Solve, Inverse, Back time.Duration
}

// SectionError is bad data in one section.
type SectionError struct {
	Index    int // position among the sections added, from 0
	From, To string
	Field    string // "from", "to", "dh_m", "length_km" or "setups"
	Err      error
}

func (e *SectionError) Error() string {
	return fmt.Sprintf("section %d (%s to %s): %s: %v", e.Index+1, e.From, e.To, e.Field, e.Err)
}
func (e *SectionError) Unwrap() error { return e.Err }

// HeldError is bad data in one held mark.
type HeldError struct {
	Index int // position among the held marks added, from 0
	Point string
	Field string // "point", "height_m" or "sigma_m"
	Err   error
}

func (e *HeldError) Error() string {
	return fmt.Sprintf("held mark %d (%s): %s: %v", e.Index+1, e.Point, e.Field, e.Err)
}
func (e *HeldError) Unwrap() error { return e.Err }

// UncontrolledError lists the points that have no path through the sections
// to any held mark: each part of the network needs held control.
type UncontrolledError struct {
	Points []string
	Parts  int // separate parts of the network without control
}

func (e *UncontrolledError) Error() string {
	const show = 8
	names := e.Points[:min(show, len(e.Points))]
	more := ""
	if len(e.Points) > show {
		more = fmt.Sprintf(" and %d more", len(e.Points)-show)
	}
	return fmt.Sprintf("%d point(s) in %d part(s) of the network have no path to held control: %s%s", len(e.Points), e.Parts, strings.Join(names, ", "), more)
}

// ErrEmptyNetwork is returned for a network without sections.
var ErrEmptyNetwork = errors.New("the network has no sections")

// SolveNetwork adjusts a leveling network by weighted least squares. Each
// section i gives the observation equation
//
//	H(toᵢ) − H(fromᵢ) = dhᵢ + vᵢ,   variance σ₀²·qᵢ,
//
// with qᵢ the length in km or the number of setups; a mark held with a
// standard deviation σₕ adds H(k) = Hₖ + vₖ with variance σₕ²; marks held
// fixed are constants. The estimate minimizes vᵀ·Q⁻¹·v.
//
// Structure of leveling networks is used exactly: a line of points with two
// sections each between two junctions is a chain whose sections in series
// are one equivalent observation H(b) − H(a) = D + v with D = Σ±dhᵢ and
// C = Σqᵢ. The junction system (normal equations N·x = Aᵀ·P·l) is ordered by
// approximate minimum degree, factorized N = L·D·Lᵀ and solved; the selected
// inverse gives Q = N⁻¹ at the junctions and on every chain's ends (a, b).
// A chain point at cofactor distance c from a, t = c/C, then has
//
//	H = (1−t)·Hₐ + t·H_b + (D₁ − t·D),   D₁ = Σ±dh from a to the point,
//	Q = (1−t)²·Qₐₐ + 2t(1−t)·Q_ab + t²·Q_bb + t(1−t)·C,
//
// since D₁ − t·D is uncorrelated with D and so with the junction heights.
// A section of the chain with cofactor q, τ = q/C, has
//
//	v = τ·(H_b − Hₐ − D),   q_vv = τ²·(C − V),   V = Qₐₐ + Q_bb − 2·Q_ab,
//
// and Baarda's w = v / (σ₀·√q_vv) is that of the chain's equivalent
// observation.
//
// Bad data is a *SectionError or *HeldError, parts of the network without
// held control an *UncontrolledError, an empty network ErrEmptyNetwork.
//
// The phases are the methods of solver (solver.go), called here in order.
func SolveNetwork(net *Network, opt NetworkOptions) (*NetworkSolution, error) {
	opt = opt.WithDefaults()
	if err := opt.Validate(); err != nil {
		panic("adjust: " + err.Error())
	}
	s := newSolver(net, opt)
	s.begin("reducing")
	if err := s.validateSections(); err != nil {
		return nil, err
	}
	if err := s.classifyHeld(); err != nil {
		return nil, err
	}
	g := s.buildIncidence()
	if err := checkControl(net, g.off, g.inc, s.controls); err != nil {
		return nil, err
	}
	s.findJunctions(g)
	s.walkChains(g)
	nmat, rhs := s.assemble()
	s.tm.Reduce = s.elapsed()

	s.begin("ordering")
	perm := sparse.Order(nmat)
	s.tm.Order = s.elapsed()
	s.begin("factorizing")
	if err := s.factorize(nmat, perm); err != nil {
		return nil, err
	}
	s.tm.Factor = s.elapsed()
	s.startClock()
	s.solve(rhs)
	s.tm.Solve = s.elapsed()
	s.begin("computing standard deviations")
	s.selectedInverse()
	s.tm.Inverse = s.elapsed()

	s.begin("back substitution")
	s.backSubstitute()
	s.tm.Back = s.elapsed()
	return s.statistics(), nil
}

// checkControl finds the parts of the network with no held mark.
func checkControl(net *Network, off, inc []int32, isHeld func(int32) bool) error {
	np := len(net.pts.list)
	seen := make([]bool, np)
	stack := make([]int32, 0, 64)
	visit := func(start int32, collect *[]string) {
		seen[start] = true
		stack = append(stack[:0], start)
		for len(stack) > 0 {
			i := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			if collect != nil {
				*collect = append(*collect, net.pts.list[i])
			}
			for _, s := range inc[off[i]:off[i+1]] {
				o := net.secs[s].from
				if o == i {
					o = net.secs[s].to
				}
				if !seen[o] {
					seen[o] = true
					stack = append(stack, o)
				}
			}
		}
	}
	for _, h := range net.held {
		if id, _ := net.pts.lookup(h.Point); isHeld(id) && !seen[id] {
			visit(id, nil)
		}
	}
	var e UncontrolledError
	for i := 0; i < np; i++ {
		if !seen[i] {
			e.Parts++
			visit(int32(i), &e.Points)
		}
	}
	if e.Parts > 0 {
		return &e
	}
	return nil
}
