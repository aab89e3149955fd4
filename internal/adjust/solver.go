package adjust

import (
	"errors"
	"fmt"
	"math"
	"time"

	"cairn/internal/sparse"
)

// A point's part as control in the solver is its HeldKind (draft.go):
// NotHeld, an unknown height; HeldFixed, a constant, H = Hₕ exactly;
// HeldWeighted, an unknown with the pseudo-observation H = Hₕ + v of
// cofactor qₕ = σₕ²/σ₀²; HeldCheck, a held mark other than the first under
// Minimal, adjusted as NotHeld, its distance from Hₕ reported, not
// observed.

// controls says the point constrains the adjustment (fixed or weighted).
func (h HeldKind) controls() bool { return h == HeldFixed || h == HeldWeighted }

// Sentinels of solver.jx for points that are not unknowns of the junction
// system; an unknown's number is ≥ 0.
const (
	fixedMark  int32 = -1 // a mark held fixed: a constant
	chainPoint int32 = -2 // a point inside a chain, eliminated
)

// chain is a line of points with two sections each between a and b, each a
// junction or a fixed mark (a = b for a loop), equivalent to the observation H(b) − H(a) = d + v of
// cofactor c = Σqᵢ, d = Σ±dhᵢ. Its sections are solver.ord[first:] up to the
// next chain's first, in order from a.
type chain struct {
	a, b  int32
	d, c  float64
	first int32
}

// incidence lists the sections at each point: those at point i are
// inc[off[i]:off[i+1]], in the order added.
type incidence struct {
	off, inc []int32
}

// at returns the sections at point i.
func (g incidence) at(i int32) []int32 { return g.inc[g.off[i]:g.off[i+1]] }

// degree returns the number of sections at point i.
func (g incidence) degree(i int32) int32 { return g.off[i+1] - g.off[i] }

// solver is one run of SolveNetwork. Its methods are the phases, called in
// the order declared; each sets the fields listed under it.
type solver struct {
	net      *Network
	opt      NetworkOptions
	progress func(phase string)
	t0       time.Time // start of the phase being timed
	tm       NetworkTimings

	// validateSections
	q []float64 // cofactor qᵢ of section i

	// classifyHeld, per point
	held []HeldKind
	// ref is the reference height H₀: the held height of the first mark
	// that controls the adjustment (fixed or weighted). Every height inside
	// the solver is relative to it (see classifyHeld).
	ref     float64
	heldH   []float64 // the held height relative to the reference, Hₕ − H₀
	heldAt0 []float64 // the held height Hₕ as given, for marks held fixed
	heldQ   []float64 // weighted: qₕ = σₕ²/σ₀²
	heldAt  []int32   // the point of each held mark, in the order added
	// marks held fixed and weighted
	nfixed, nweighted int

	// findJunctions
	jx []int32 // per point: its unknown, fixedMark or chainPoint
	nj int     // unknowns of the junction system

	// walkChains
	chains []chain
	ord    []int32 // sections chain by chain
	sign   []int8  // per section: +1 walked from → to, −1 to → from

	// factorize, solve, selectedInverse
	chol sparse.Cholesky
	x    []float64 // junction heights, N⁻¹·Aᵀ·P·l
	qjj  []float64 // diagonal of N⁻¹

	// backSubstitute
	sol      *NetworkSolution
	vtpv     float64 // Σ v²/q; vᵀΣ⁻¹v = vtpv/σ₀²
	testable int     // observations with redundancy (a finite w)
	tests    int     // distinct tests: chains and weighted marks with redundancy

	// flag
	critical, level float64 // the critical value of each test, and its level
	flagged         int
}

// newSolver returns a solver of net with opt (defaulted and valid).
func newSolver(net *Network, opt NetworkOptions) *solver {
	s := &solver{net: net, opt: opt, progress: opt.Progress}
	if s.progress == nil {
		s.progress = func(string) {}
	}
	return s
}

// begin reports phase as begun and starts its clock.
func (s *solver) begin(phase string) {
	s.progress(phase)
	s.startClock()
}

// startClock starts timing a phase that is not reported.
func (s *solver) startClock() { s.t0 = time.Now() }

// elapsed returns the time since the clock was started.
func (s *solver) elapsed() time.Duration { return time.Since(s.t0) }

// validateSections checks every section and sets its cofactor qᵢ: the length
// in km, or the number of setups with WeightBySetups (a section of length 0
// is then allowed).
func (s *solver) validateSections() error {
	net := s.net
	if len(net.secs) == 0 {
		return ErrEmptyNetwork
	}
	bySetups := s.opt.Weighting == WeightBySetups
	s.q = make([]float64, len(net.secs))
	for i, sec := range net.secs {
		switch {
		case sec.from == sec.to:
			return sectionError(net, i, "to", "a section cannot begin and end at the same point")
		case math.IsNaN(sec.dh) || math.IsInf(sec.dh, 0):
			return sectionError(net, i, "dh_m", "height difference %v is not a finite number", sec.dh)
		case !(sec.km > 0) || math.IsInf(sec.km, 0):
			if !bySetups || sec.km != 0 || math.IsNaN(sec.km) {
				return sectionError(net, i, "length_km", "length %v km must be a positive finite number", sec.km)
			}
		}
		if bySetups {
			if sec.setups <= 0 {
				return sectionError(net, i, "setups", "%d setups; weighting by setups needs at least one", sec.setups)
			}
			s.q[i] = float64(sec.setups)
		} else {
			s.q[i] = sec.km
		}
	}
	return nil
}

func sectionError(net *Network, i int, field, format string, a ...any) error {
	sec := net.secs[i]
	return &SectionError{Index: i, From: net.pts.list[sec.from], To: net.pts.list[sec.to], Field: field, Err: fmt.Errorf(format, a...)}
}

// classifyHeld checks every held mark and sets its point's state: fixed
// (σₕ = 0, or the first mark under Minimal), weighted with qₕ = σₕ²/σ₀², or
// checked (any other mark under Minimal). A network without a fixed or
// weighted mark is uncontrolled.
//
// It also chooses the reference height H₀, the held height of the first
// mark that controls the adjustment, and keeps every held height as
// Hₕ − H₀. The normal equations then carry heights relative to the datum's
// level, not absolute ones: the solution's rounding error, which grows with
// the size of the right-hand side times the condition of N (large when
// weights differ widely), no longer grows with the height of the datum.
// H₀ is added back to every adjusted height at the end (addReference); a
// mark held fixed keeps the height it was given, unchanged.
func (s *solver) classifyHeld() error {
	net, opt := s.net, s.opt
	np := len(net.pts.list)
	s.held = make([]HeldKind, np)
	s.heldH = make([]float64, np)
	s.heldAt0 = make([]float64, np)
	s.heldQ = make([]float64, np)
	s.heldAt = make([]int32, len(net.held))
	for k, h := range net.held {
		herr := func(field, format string, a ...any) error {
			return &HeldError{Index: k, Point: h.Point, Field: field, Err: fmt.Errorf(format, a...)}
		}
		id, ok := net.pts.lookup(h.Point)
		switch {
		case !ok:
			return herr("point", "%q is not a point of the network", h.Point)
		case s.held[id] != NotHeld:
			return herr("point", "%q is held twice", h.Point)
		case math.IsNaN(h.HeightM) || math.IsInf(h.HeightM, 0):
			return herr("height_m", "height %v is not a finite number", h.HeightM)
		case !(h.SigmaM >= 0) || math.IsInf(h.SigmaM, 0):
			return herr("sigma_m", "standard deviation %v must be zero or a positive finite number", h.SigmaM)
		}
		s.heldAt[k] = id
		s.heldH[id] = h.HeightM
		s.held[id] = HoldKind(k, h.SigmaM, opt.Minimal)
		switch s.held[id] {
		case HeldFixed:
			s.nfixed++
		case HeldWeighted:
			s.heldQ[id] = (h.SigmaM / opt.SigmaM) * (h.SigmaM / opt.SigmaM)
			s.nweighted++
		}
	}
	if s.nfixed+s.nweighted == 0 {
		return &UncontrolledError{Points: net.pts.list, Parts: 1}
	}
	for _, id := range s.heldAt {
		if s.held[id].controls() {
			s.ref = s.heldH[id]
			break
		}
	}
	for _, id := range s.heldAt {
		s.heldAt0[id] = s.heldH[id]
		s.heldH[id] -= s.ref
	}
	return nil
}

// controls says point id is held fixed or weighted.
func (s *solver) controls(id int32) bool { return s.held[id].controls() }

// buildIncidence lists the sections at each point: a counting sort of the
// section ends by point. The fill advances off[i] from the start of point
// i's list to its end, the start of point i+1's, and the offsets are then
// shifted back by one place; no cursor array is needed.
func (s *solver) buildIncidence() incidence {
	np, secs := len(s.net.pts.list), s.net.secs
	off := make([]int32, np+1)
	for _, sec := range secs {
		off[sec.from+1]++
		off[sec.to+1]++
	}
	for i := 0; i < np; i++ {
		off[i+1] += off[i]
	}
	inc := make([]int32, 2*len(secs))
	for i, sec := range secs {
		inc[off[sec.from]] = int32(i)
		off[sec.from]++
		inc[off[sec.to]] = int32(i)
		off[sec.to]++
	}
	copy(off[1:], off[:np])
	off[0] = 0
	return incidence{off: off, inc: inc}
}

// findJunctions numbers the unknowns of the junction system: points held
// weighted, and free or checked points with other than two sections. Marks
// held fixed are constants; the other points lie inside chains.
func (s *solver) findJunctions(g incidence) {
	np := int32(len(s.net.pts.list))
	held := s.held
	jx := make([]int32, np)
	nj := int32(0)
	for i := int32(0); i < np; i++ {
		switch {
		case held[i] == HeldFixed:
			jx[i] = fixedMark
		case held[i] == HeldWeighted || g.degree(i) != 2:
			jx[i] = nj
			nj++
		default:
			jx[i] = chainPoint
		}
	}
	s.jx, s.nj = jx, int(nj)
}

// walkChains walks from every junction and fixed mark along each section
// not yet walked to the next junction or fixed mark, summing the chain's
// d = Σ±dhᵢ and c = Σqᵢ.
func (s *solver) walkChains(g incidence) {
	np, ns := int32(len(s.net.pts.list)), len(s.net.secs)
	secs, q, jx := s.net.secs, s.q, s.jx
	chains := make([]chain, 0, ns/4+1)
	ord := make([]int32, 0, ns)
	sign := make([]int8, ns)
	for i := int32(0); i < np; i++ {
		if jx[i] == chainPoint {
			continue
		}
		for _, s0 := range g.at(i) {
			if sign[s0] != 0 {
				continue
			}
			ch := chain{a: i, first: int32(len(ord))}
			cur, k := i, s0
			for {
				sec := &secs[k]
				var next int32
				if sec.from == cur {
					sign[k], next = 1, sec.to
					ch.d += sec.dh
				} else {
					sign[k], next = -1, sec.from
					ch.d -= sec.dh
				}
				ch.c += q[k]
				ord = append(ord, k)
				if jx[next] != chainPoint {
					ch.b = next
					break
				}
				// The other section at the chain point.
				if e := g.at(next); e[0] == k {
					k = e[1]
				} else {
					k = e[0]
				}
				cur = next
			}
			chains = append(chains, ch)
		}
	}
	s.chains, s.ord, s.sign = chains, ord, sign
}

// assemble builds the normal equations N·x = Aᵀ·P·l of the junction system:
// each chain between distinct ends adds weight 1/c to H(b) − H(a) = d (held
// heights of fixed ends moved to the right-hand side), each weighted mark
// 1/qₕ to H = Hₕ. A loop closing on one junction is a pure condition and
// adds nothing.
func (s *solver) assemble() (*sparse.Symmetric, []float64) {
	jx, hh := s.jx, s.heldH
	bld := sparse.NewBuilder(s.nj, 3*len(s.chains)+s.nweighted)
	rhs := make([]float64, s.nj)
	for _, ch := range s.chains {
		if ch.a == ch.b {
			continue
		}
		w := 1 / ch.c
		ja, jb := jx[ch.a], jx[ch.b]
		l := ch.d
		if ja == fixedMark {
			l += hh[ch.a]
		}
		if jb == fixedMark {
			l -= hh[ch.b]
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
	for i, h := range s.held {
		if h == HeldWeighted {
			j := jx[i]
			bld.Add(int(j), int(j), 1/s.heldQ[i])
			rhs[j] += hh[i] / s.heldQ[i]
		}
	}
	return bld.Symmetric(), rhs
}

// factorize factorizes N, in the order perm (approximate minimum degree),
// as L·D·Lᵀ. N is positive definite when every part of the network is
// controlled; a failure names the point whose pivot vanished.
func (s *solver) factorize(nmat *sparse.Symmetric, perm []int32) error {
	err := s.chol.FactorizeOrdered(nmat, perm)
	if err == nil {
		return nil
	}
	var npd *sparse.NotPositiveDefiniteError
	if errors.As(err, &npd) {
		for i, j := range s.jx {
			if j == int32(npd.Col) {
				return fmt.Errorf("the normal equations are singular or ill-conditioned at point %s: %w", s.net.pts.list[i], err)
			}
		}
	}
	return fmt.Errorf("factorize normal equations: %w", err)
}

// solve sets the junction heights x = N⁻¹·Aᵀ·P·l.
func (s *solver) solve(rhs []float64) {
	s.x = make([]float64, s.nj)
	s.chol.SolveTo(s.x, rhs)
}

// selectedInverse computes Q = N⁻¹ on the pattern of the factor (every
// chain's end pair included) and keeps its diagonal.
func (s *solver) selectedInverse() {
	s.qjj = make([]float64, s.nj)
	s.chol.InverseDiagTo(s.qjj)
}

// backSubstitute fills the solution: heights and standard deviations of
// junctions and fixed marks, then of the chain points with the residuals of
// the chain's sections (formulas at SolveNetwork), then the residuals of the
// held marks.
func (s *solver) backSubstitute() {
	net := s.net
	s.sol = &NetworkSolution{
		Points:   make([]PointResult, len(net.pts.list)),
		Sections: make([]Residual, len(net.secs)),
		Held:     make([]Residual, len(net.held)),
	}
	s.junctionResults()
	s.chainResults()
	s.heldResults()
	s.addReference()
	s.flag()
}

// addReference turns the relative heights back into heights: H₀ is added
// to every adjusted point, and a mark held fixed gets its held height as
// given (so it is exactly what was held, whatever the rounding of Hₕ − H₀).
// Residuals and standard deviations do not depend on H₀.
func (s *solver) addReference() {
	for i := range s.sol.Points {
		p := &s.sol.Points[i]
		if s.jx[i] == fixedMark {
			p.HeightM = s.heldAt0[i]
		} else {
			p.HeightM += s.ref
		}
	}
}

// junctionResults sets every point's name and held flag, and the height and
// σ₀·√Q(j, j) of the junctions; fixed marks keep their held height, σ = 0.
func (s *solver) junctionResults() {
	pts, jx, x, qjj, sig := s.sol.Points, s.jx, s.x, s.qjj, s.opt.SigmaM
	for i := range pts {
		p := &pts[i]
		p.Point = s.net.pts.list[i]
		p.Held = s.held[i].controls()
		if j := jx[i]; j == fixedMark {
			p.HeightM = s.heldH[i]
		} else if j >= 0 {
			p.HeightM = x[j]
			p.SDM = sig * math.Sqrt(max(qjj[j], 0))
		}
	}
}

// snoop sets the residual v, its standard deviation σ₀·√q_vv and Baarda's w
// of one observation; q_vv up to 10⁻⁸·scale is taken as no redundancy. It
// reports whether the observation can be tested; flag judges w later, once
// the number of tests is known.
func (s *solver) snoop(r *Residual, v, qvv, scale float64) bool {
	r.ResidualM = v
	if qvv > 1e-8*scale { // else no redundancy, up to rounding
		r.SDM = s.opt.SigmaM * math.Sqrt(qvv)
		r.W = v / r.SDM
		s.testable++
		return true
	}
	r.W = math.NaN()
	return false
}

// flag sets the critical value of data snooping and flags every
// observation whose |w| exceeds it. Per observation the critical value is
// SnoopCritical; for the family of the network's distinct tests it is that
// of Šidák's level for each (options.go, SnoopFamily), the family's level
// being that of SnoopCritical for one test.
func (s *solver) flag() {
	s.critical = s.opt.SnoopCritical
	s.level = SnoopLevel(s.critical)
	if s.opt.Snooping == SnoopFamily && s.tests > 0 {
		s.level = SidakLevel(s.level, s.tests)
		s.critical = snoopCritical(s.level)
	}
	mark := func(rs []Residual) {
		for i := range rs {
			if r := &rs[i]; math.Abs(r.W) > s.critical { // false for NaN
				r.Flagged = true
				s.flagged++
			}
		}
	}
	mark(s.sol.Sections)
	mark(s.sol.Held)
}

// chainResults interpolates the chain points between their junctions and
// sets the residuals of every chain's sections.
func (s *solver) chainResults() {
	secs, q, jx, sign, ord := s.net.secs, s.q, s.jx, s.sign, s.ord
	chains, qjj, pts, res := s.chains, s.qjj, s.sol.Points, s.sol.Sections
	sig := s.opt.SigmaM
	vtpv := s.vtpv
	for c, ch := range chains {
		end := int32(len(ord))
		if c+1 < len(chains) {
			end = chains[c+1].first
		}
		ja, jb := jx[ch.a], jx[ch.b]
		ha, hb := pts[ch.a].HeightM, pts[ch.b].HeightM
		var qaa, qbb, qab float64
		if ja >= 0 {
			qaa = qjj[ja]
		}
		if jb >= 0 {
			qbb = qjj[jb]
		}
		switch {
		case ja >= 0 && ja == jb:
			qab = qaa
		case ja >= 0 && jb >= 0:
			v, ok := s.chol.InverseAt(int(ja), int(jb))
			if !ok {
				panic("adjust: chain ends off the pattern of the factor")
			}
			qab = v
		}
		veq := hb - ha - ch.d
		vtpv += veq * veq / ch.c
		qvvEq := ch.c - (qaa + qbb - 2*qab)
		if qvvEq > 1e-8*ch.c { // the chain's sections share one w: one test
			s.tests++
		}
		var cum, d1 float64
		for _, k := range ord[ch.first:end] {
			sec := &secs[k]
			tau := q[k] / ch.c
			s.snoop(&res[k], float64(sign[k])*tau*veq, tau*tau*qvvEq, tau*tau*ch.c)
			next := sec.to
			if sign[k] > 0 {
				d1 += sec.dh
			} else {
				next, d1 = sec.from, d1-sec.dh
			}
			if jx[next] != chainPoint {
				break // the far junction
			}
			cum += q[k]
			t := cum / ch.c
			p := &pts[next]
			p.HeightM = (1-t)*ha + t*hb + (d1 - t*ch.d)
			qpp := (1-t)*(1-t)*qaa + 2*t*(1-t)*qab + t*t*qbb + t*(1-t)*ch.c
			p.SDM = sig * math.Sqrt(max(qpp, 0))
		}
	}
	s.vtpv = vtpv
}

// heldResults sets the residual of each weighted mark's pseudo-observation,
// v = H − Hₕ with q_vv = qₕ − Q(j, j), and for each checked mark its
// distance H − Hₕ from the held height (W = NaN: not an observation).
// Fixed marks have v = 0.
func (s *solver) heldResults() {
	pts, res := s.sol.Points, s.sol.Held
	for k, id := range s.heldAt {
		switch s.held[id] {
		case HeldCheck:
			res[k] = Residual{ResidualM: pts[id].HeightM - s.heldH[id], W: math.NaN()}
		case HeldWeighted:
			j, hq := s.jx[id], s.heldQ[id]
			v := s.x[j] - s.heldH[id]
			s.vtpv += v * v / hq
			if s.snoop(&res[k], v, hq-s.qjj[j], hq) {
				s.tests++
			}
		}
	}
}

// statistics sets the solution's counts, vᵀΣ⁻¹v = Σv²/(σ₀²·q), the
// variance factor with its χ² test, and the sizes and timings of the
// junction system, and returns the solution.
func (s *solver) statistics() *NetworkSolution {
	sig := s.opt.SigmaM
	st := &s.sol.Stats
	st.Observations = len(s.net.secs) + s.nweighted
	st.Unknowns = len(s.net.pts.list) - s.nfixed
	st.Redundancy = st.Observations - st.Unknowns
	st.VTPV = s.vtpv / (sig * sig)
	st.VarianceFactor = math.NaN()
	if st.Redundancy > 0 {
		st.VarianceFactor = st.VTPV / float64(st.Redundancy)
	}
	st.ChiSquare = TestVarianceFactor(st.VTPV, st.Redundancy, s.opt.Alpha)
	st.Snooping = s.opt.Snooping
	st.SnoopCritical = s.critical
	st.SnoopLevel = s.level
	st.SnoopTests = s.tests
	st.SnoopTestable = s.testable
	st.SnoopExpected = float64(s.testable) * s.level
	st.Flagged = s.flagged
	st.Junctions = s.nj
	st.FactorNNZ = s.chol.NNZ()
	st.Timings = s.tm
	return s.sol
}
