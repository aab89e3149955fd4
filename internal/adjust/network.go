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
	SnoopCritical  float64
	Flagged        int // observations with |W| above the critical value
	Junctions      int // unknowns of the reduced (junction) system
	FactorNNZ      int // entries of its Cholesky factor below the diagonal
	Timings        NetworkTimings
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
func SolveNetwork(net *Network, opt NetworkOptions) (*NetworkSolution, error) {
	opt = opt.WithDefaults()
	if err := opt.Validate(); err != nil {
		panic("adjust: " + err.Error())
	}
	progress := func(string) {}
	if opt.Progress != nil {
		progress = opt.Progress
	}
	var tm NetworkTimings
	t0 := time.Now()
	progress("reducing")

	np := len(net.pts.list)
	ns := len(net.secs)
	if ns == 0 {
		return nil, ErrEmptyNetwork
	}
	q := make([]float64, ns)
	for i, s := range net.secs {
		serr := func(field, format string, a ...any) error {
			return &SectionError{Index: i, From: net.pts.list[s.from], To: net.pts.list[s.to], Field: field, Err: fmt.Errorf(format, a...)}
		}
		switch {
		case s.from == s.to:
			return nil, serr("to", "a section cannot begin and end at the same point")
		case math.IsNaN(s.dh) || math.IsInf(s.dh, 0):
			return nil, serr("dh_m", "height difference %v is not a finite number", s.dh)
		case !(s.km > 0) || math.IsInf(s.km, 0):
			if opt.Weighting == WeightByLength || s.km != 0 || math.IsNaN(s.km) {
				return nil, serr("length_km", "length %v km must be a positive finite number", s.km)
			}
		}
		if opt.Weighting == WeightBySetups {
			if s.setups <= 0 {
				return nil, serr("setups", "%d setups; weighting by setups needs at least one", s.setups)
			}
			q[i] = float64(s.setups)
		} else {
			q[i] = s.km
		}
	}

	// Held marks: fixed ones are constants; weighted ones have qₕ = σₕ²/σ₀².
	const free, fixed, weighted = 0, 1, 2
	hstate := make([]uint8, np)
	hval := make([]float64, np)
	hq := make([]float64, np)
	hidx := make([]int32, len(net.held))
	nfixed, nweighted := 0, 0
	for k, h := range net.held {
		herr := func(field, format string, a ...any) error {
			return &HeldError{Index: k, Point: h.Point, Field: field, Err: fmt.Errorf(format, a...)}
		}
		id, ok := net.pts.lookup(h.Point)
		switch {
		case !ok:
			return nil, herr("point", "%q is not a point of the network", h.Point)
		case hstate[id] != free:
			return nil, herr("point", "%q is held twice", h.Point)
		case math.IsNaN(h.HeightM) || math.IsInf(h.HeightM, 0):
			return nil, herr("height_m", "height %v is not a finite number", h.HeightM)
		case !(h.SigmaM >= 0) || math.IsInf(h.SigmaM, 0):
			return nil, herr("sigma_m", "standard deviation %v must be zero or a positive finite number", h.SigmaM)
		}
		hidx[k] = id
		hval[id] = h.HeightM
		switch {
		case opt.Minimal && k > 0:
			hstate[id] = weighted + 1 // marked, adjusted as free
		case opt.Minimal || h.SigmaM == 0:
			hstate[id] = fixed
			nfixed++
		default:
			hstate[id] = weighted
			hq[id] = (h.SigmaM / opt.SigmaM) * (h.SigmaM / opt.SigmaM)
			nweighted++
		}
	}
	if nfixed+nweighted == 0 {
		return nil, &UncontrolledError{Points: net.pts.list, Parts: 1}
	}
	isHeld := func(id int32) bool { return hstate[id] == fixed || hstate[id] == weighted }

	// Incidence lists of the sections at each point.
	off := make([]int32, np+1)
	for _, s := range net.secs {
		off[s.from+1]++
		off[s.to+1]++
	}
	for i := 0; i < np; i++ {
		off[i+1] += off[i]
	}
	inc := make([]int32, 2*ns)
	pos := make([]int32, np)
	copy(pos, off[:np])
	for i, s := range net.secs {
		inc[pos[s.from]] = int32(i)
		pos[s.from]++
		inc[pos[s.to]] = int32(i)
		pos[s.to]++
	}
	if err := checkControl(net, off, inc, isHeld); err != nil {
		return nil, err
	}

	// Junctions (terminals): held points and points of degree other than 2.
	// jx is the unknown's number in the junction system, -1 for a fixed mark;
	// for chain points it is -2.
	jx := pos // reuse
	nj := 0
	for i := 0; i < np; i++ {
		switch {
		case hstate[i] == fixed:
			jx[i] = -1
		case isHeld(int32(i)) || off[i+1]-off[i] != 2:
			jx[i] = int32(nj)
			nj++
		default:
			jx[i] = -2
		}
	}

	// Chains: walk from every junction along each section not yet used.
	// ord lists sections chain by chain; sign[k] is +1 when the section is
	// walked from its from-point to its to-point.
	type chain struct {
		a, b  int32
		d, c  float64
		first int32 // into ord
	}
	chains := make([]chain, 0, ns/4+1)
	ord := make([]int32, 0, ns)
	sign := make([]int8, ns)
	for i := 0; i < np; i++ {
		if jx[i] == -2 {
			continue
		}
		for _, s0 := range inc[off[i]:off[i+1]] {
			if sign[s0] != 0 {
				continue
			}
			ch := chain{a: int32(i), first: int32(len(ord))}
			cur, s := int32(i), s0
			for {
				sec := &net.secs[s]
				var next int32
				if sec.from == cur {
					sign[s], next = 1, sec.to
					ch.d += sec.dh
				} else {
					sign[s], next = -1, sec.from
					ch.d -= sec.dh
				}
				ch.c += q[s]
				ord = append(ord, s)
				if jx[next] != -2 {
					ch.b = next
					break
				}
				// The other section at the chain point.
				e := inc[off[next] : off[next]+2]
				if e[0] == s {
					s = e[1]
				} else {
					s = e[0]
				}
				cur = next
			}
			chains = append(chains, ch)
		}
	}

	// Normal equations of the junction system.
	bld := sparse.NewBuilder(nj, 3*len(chains)+nweighted)
	rhs := make([]float64, nj)
	for _, ch := range chains {
		if ch.a == ch.b {
			continue // a loop closing on one junction: a pure condition
		}
		w := 1 / ch.c
		ja, jb := jx[ch.a], jx[ch.b]
		l := ch.d
		if ja < 0 {
			l += hval[ch.a]
		}
		if jb < 0 {
			l -= hval[ch.b]
		}
		if ja >= 0 {
			bld.Add(int(ja), int(ja), w)
			rhs[ja] -= w * l
		}
		if jb >= 0 {
			bld.Add(int(jb), int(jb), w)
			rhs[jb] += w * l
		}
		if ja >= 0 && jb >= 0 {
			bld.Add(int(ja), int(jb), -w)
		}
	}
	for i := 0; i < np; i++ {
		if hstate[i] == weighted {
			bld.Add(int(jx[i]), int(jx[i]), 1/hq[i])
			rhs[jx[i]] += hval[i] / hq[i]
		}
	}
	nmat := bld.Symmetric()
	tm.Reduce = time.Since(t0)

	progress("ordering")
	t0 = time.Now()
	perm := sparse.Order(nmat)
	tm.Order = time.Since(t0)
	progress("factorizing")
	t0 = time.Now()
	var chol sparse.Cholesky
	if err := chol.FactorizeOrdered(nmat, perm); err != nil {
		var npd *sparse.NotPositiveDefiniteError
		if errors.As(err, &npd) {
			for i := 0; i < np; i++ {
				if jx[i] == int32(npd.Col) {
					return nil, fmt.Errorf("the normal equations are singular or ill-conditioned at point %s: %w", net.pts.list[i], err)
				}
			}
		}
		return nil, fmt.Errorf("factorize normal equations: %w", err)
	}
	tm.Factor = time.Since(t0)
	t0 = time.Now()
	x := make([]float64, nj)
	chol.SolveTo(x, rhs)
	tm.Solve = time.Since(t0)
	progress("computing standard deviations")
	t0 = time.Now()
	qj := rhs // reuse: diagonal of N⁻¹
	chol.InverseDiagTo(qj)
	tm.Inverse = time.Since(t0)

	// Back substitution along the chains.
	progress("back substitution")
	t0 = time.Now()
	sol := &NetworkSolution{
		Points:   make([]PointResult, np),
		Sections: make([]Residual, ns),
		Held:     make([]Residual, len(net.held)),
	}
	sig := opt.SigmaM
	for i := 0; i < np; i++ {
		p := &sol.Points[i]
		p.Point = net.pts.list[i]
		p.Held = isHeld(int32(i))
		if j := jx[i]; j == -1 {
			p.HeightM = hval[i]
		} else if j >= 0 {
			p.HeightM = x[j]
			p.SDM = sig * math.Sqrt(max(qj[j], 0))
		}
	}
	var vtpv float64
	flagged := 0
	snoop := func(r *Residual, v, qvv, scale float64) {
		r.ResidualM = v
		if qvv > 1e-8*scale { // else no redundancy, up to rounding
			r.SDM = sig * math.Sqrt(qvv)
			r.W = v / r.SDM
			if math.Abs(r.W) > opt.SnoopCritical {
				r.Flagged = true
				flagged++
			}
		} else {
			r.W = math.NaN()
		}
	}
	for c, ch := range chains {
		end := int32(len(ord))
		if c+1 < len(chains) {
			end = chains[c+1].first
		}
		ja, jb := jx[ch.a], jx[ch.b]
		ha, hb := sol.Points[ch.a].HeightM, sol.Points[ch.b].HeightM
		var qaa, qbb, qab float64
		if ja >= 0 {
			qaa = qj[ja]
		}
		if jb >= 0 {
			qbb = qj[jb]
		}
		switch {
		case ja >= 0 && ja == jb:
			qab = qaa
		case ja >= 0 && jb >= 0:
			v, ok := chol.InverseAt(int(ja), int(jb))
			if !ok {
				panic("adjust: chain ends off the pattern of the factor")
			}
			qab = v
		}
		veq := hb - ha - ch.d
		vtpv += veq * veq / ch.c
		qvvEq := ch.c - (qaa + qbb - 2*qab)
		var cum, d1 float64
		for _, s := range ord[ch.first:end] {
			sec := &net.secs[s]
			tau := q[s] / ch.c
			snoop(&sol.Sections[s], float64(sign[s])*tau*veq, tau*tau*qvvEq, tau*tau*ch.c)
			next := sec.to
			if sign[s] > 0 {
				d1 += sec.dh
			} else {
				next, d1 = sec.from, d1-sec.dh
			}
			if jx[next] != -2 {
				break // the far junction
			}
			cum += q[s]
			t := cum / ch.c
			p := &sol.Points[next]
			p.HeightM = (1-t)*ha + t*hb + (d1 - t*ch.d)
			qpp := (1-t)*(1-t)*qaa + 2*t*(1-t)*qab + t*t*qbb + t*(1-t)*ch.c
			p.SDM = sig * math.Sqrt(max(qpp, 0))
		}
	}
	for k, id := range hidx {
		if hstate[id] == weighted+1 {
			// Minimal constraint: how far the adjustment is from the held
			// value, not an observation.
			sol.Held[k] = Residual{ResidualM: sol.Points[id].HeightM - hval[id], W: math.NaN()}
		}
		if hstate[id] != weighted {
			continue
		}
		j := jx[id]
		v := x[j] - hval[id]
		vtpv += v * v / hq[id]
		snoop(&sol.Held[k], v, hq[id]-qj[j], hq[id])
	}
	tm.Back = time.Since(t0)

	st := &sol.Stats
	st.Observations = ns + nweighted
	st.Unknowns = np - nfixed
	st.Redundancy = st.Observations - st.Unknowns
	st.VTPV = vtpv / (sig * sig)
	st.VarianceFactor = math.NaN()
	if st.Redundancy > 0 {
		st.VarianceFactor = st.VTPV / float64(st.Redundancy)
	}
	st.ChiSquare = TestVarianceFactor(st.VTPV, st.Redundancy, opt.Alpha)
	st.SnoopCritical = opt.SnoopCritical
	st.Flagged = flagged
	st.Junctions = nj
	st.FactorNNZ = chol.NNZ()
	st.Timings = tm
	return sol, nil
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
