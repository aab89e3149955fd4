// Package netgen generates invented leveling networks for tests and
// benchmarks, deterministically from a seed: a jittered grid of junction
// marks joined by level lines of intermediate marks, a smooth height surface,
// observations with noise of σ = 1 mm·√L, and held junctions spread over the
// area. No generated mark is real.
package netgen

import (
	"bufio"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
)

// Section is one generated observation: DhM = height(To) − height(From) plus
// noise, LengthKm its length.
type Section struct {
	From, To string
	DhM      float64
	LengthKm float64
}

// Network is a generated network with its true heights.
type Network struct {
	Points []string  // every point, junctions first
	Truth  []float64 // true height of each point, metres
	// Sections are written line by line, lines in random order.
	Sections []Section
	// Held are indices into Points of the held junctions.
	Held []int
}

// Options shape a network. The zero value of a field means its default.
type Options struct {
	Points    int     // about this many points (default 10000)
	PerLine   int     // intermediate marks per line (default 5; -1 for none)
	Drop      float64 // fraction of grid edges dropped (default 0.10)
	SpacingKm float64 // junction grid spacing (default 7)
	HeldEvery int     // about one held junction per this many points (default 2000)
	Seed      uint64
}

// Generate returns a network built from o.
func Generate(o Options) *Network {
	if o.Points == 0 {
		o.Points = 10000
	}
	m := o.PerLine
	if m == 0 {
		m = 5
	} else if m < 0 {
		m = 0
	}
	if o.Drop == 0 {
		o.Drop = 0.10
	}
	if o.SpacingKm == 0 {
		o.SpacingKm = 7
	}
	if o.HeldEvery == 0 {
		o.HeldEvery = 2000
	}
	rng := rand.New(rand.NewPCG(o.Seed, 0x636169726e))
	// g² junctions and (1 − drop)·2g(g−1) lines of m points give o.Points.
	a := 1 + 2*(1-o.Drop)*float64(m)
	b := -2 * (1 - o.Drop) * float64(m)
	g := max(2, int(math.Round((-b+math.Sqrt(b*b+4*a*float64(o.Points)))/(2*a))))
	nj := g * g
	type edge struct{ u, v int }
	var all []edge
	for r := 0; r < g; r++ {
		for c := 0; c < g; c++ {
			k := r*g + c
			if c+1 < g {
				all = append(all, edge{k, k + 1})
			}
			if r+1 < g {
				all = append(all, edge{k, k + g})
			}
		}
	}
	keepN := int(math.Round((1 - o.Drop) * float64(len(all))))
	if m > 0 {
		keepN = int(math.Round(float64(o.Points-nj) / float64(m)))
	}
	keepN = max(nj-1, min(len(all), keepN))
	// A random spanning tree (Kruskal over shuffled edges), then extras.
	order := rng.Perm(len(all))
	parent := make([]int, nj)
	for i := range parent {
		parent[i] = i
	}
	find := func(x int) int {
		for parent[x] != x {
			parent[x] = parent[parent[x]]
			x = parent[x]
		}
		return x
	}
	var tree, extra []int
	for _, e := range order {
		ru, rv := find(all[e].u), find(all[e].v)
		if ru != rv {
			parent[ru] = rv
			tree = append(tree, e)
		} else {
			extra = append(extra, e)
		}
	}
	keep := append(tree, extra[:keepN-len(tree)]...)

	net := &Network{}
	px := make([]float64, 0, o.Points+nj)
	py := make([]float64, 0, o.Points+nj)
	jit := 0.25 * o.SpacingKm
	for k := 0; k < nj; k++ {
		net.Points = append(net.Points, fmt.Sprintf("J%d-%d", k/g, k%g))
		px = append(px, float64(k%g)*o.SpacingKm+(2*rng.Float64()-1)*jit)
		py = append(py, float64(k/g)*o.SpacingKm+(2*rng.Float64()-1)*jit)
	}
	type line struct {
		seq  []int
		lens []float64
	}
	lines := make([]line, 0, len(keep))
	for _, e := range keep {
		u, v := all[e].u, all[e].v
		dx, dy := px[v]-px[u], py[v]-py[u]
		dist := math.Hypot(dx, dy)
		total := dist * (1.05 + 0.25*rng.Float64())
		ws := make([]float64, m+1)
		sw := 0.0
		for i := range ws {
			ws[i] = 0.5 + rng.Float64()
			sw += ws[i]
		}
		ln := line{seq: []int{u}}
		acc := 0.0
		for i := 0; i <= m; i++ {
			ln.lens = append(ln.lens, math.Round(min(2.5, max(0.3, total*ws[i]/sw))*1000)/1000)
		}
		for i := 0; i < m; i++ {
			acc += ws[i] / sw
			off := 0.3 * rng.NormFloat64()
			id := len(net.Points)
			net.Points = append(net.Points, fmt.Sprintf("P%06d", id-nj+1))
			px = append(px, px[u]+acc*dx-off*dy/dist)
			py = append(py, py[u]+acc*dy+off*dx/dist)
			ln.seq = append(ln.seq, id)
		}
		ln.seq = append(ln.seq, v)
		lines = append(lines, ln)
	}
	n := len(net.Points)
	// A smooth surface: plane waves of 15-300 km, scaled to 0-500 m.
	type wave struct{ kx, ky, ph, am float64 }
	waves := make([]wave, 24)
	for i := range waves {
		lam := math.Exp(math.Log(15) + rng.Float64()*(math.Log(300)-math.Log(15)))
		th := 2 * math.Pi * rng.Float64()
		k := 2 * math.Pi / lam
		waves[i] = wave{k * math.Cos(th), k * math.Sin(th), 2 * math.Pi * rng.Float64(), math.Pow(lam/300, 0.8) * (0.5 + 0.5*rng.Float64())}
	}
	raw := make([]float64, n)
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range raw {
		s := 0.0
		for _, w := range waves {
			s += w.am * math.Sin(w.kx*px[i]+w.ky*py[i]+w.ph)
		}
		raw[i] = s
		lo, hi = min(lo, s), max(hi, s)
	}
	net.Truth = make([]float64, n)
	for i, r := range raw {
		net.Truth[i] = math.Round((r-lo)*500/(hi-lo)*1e5) / 1e5
	}
	// Observations: lines in random order, each in a random direction.
	rng.Shuffle(len(lines), func(i, j int) { lines[i], lines[j] = lines[j], lines[i] })
	net.Sections = make([]Section, 0, len(lines)*(m+1))
	for _, ln := range lines {
		seq, lens := ln.seq, ln.lens
		rev := rng.IntN(2) == 0
		for i := range lens {
			a, b, l := seq[i], seq[i+1], lens[i]
			if rev {
				a, b, l = seq[len(seq)-1-i], seq[len(seq)-2-i], lens[len(lens)-1-i]
			}
			dh := net.Truth[b] - net.Truth[a] + 0.001*math.Sqrt(l)*rng.NormFloat64()
			net.Sections = append(net.Sections, Section{net.Points[a], net.Points[b], math.Round(dh*1e5) / 1e5, l})
		}
	}
	// Held junctions: one in each of nh blocks of a kb×kb block grid.
	nh := max(2, int(math.Round(float64(n)/float64(o.HeldEvery))))
	kb := int(math.Ceil(math.Sqrt(float64(nh))))
	if kb <= g {
		for _, bi := range rng.Perm(kb * kb)[:nh] {
			br, bc := bi/kb, bi%kb
			r := br*g/kb + rng.IntN((br+1)*g/kb-br*g/kb)
			c := bc*g/kb + rng.IntN((bc+1)*g/kb-bc*g/kb)
			net.Held = append(net.Held, r*g+c)
		}
	} else {
		net.Held = rng.Perm(nj)[:min(nh, nj)]
	}
	return net
}

// WriteFiles writes sections.csv and held.csv (the exchange format) and
// truth.csv into dir.
func (n *Network) WriteFiles(dir string) error {
	write := func(name string, fill func(w *bufio.Writer)) error {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			return err
		}
		w := bufio.NewWriterSize(f, 1<<16)
		fill(w)
		if err := w.Flush(); err != nil {
			f.Close()
			return fmt.Errorf("write %s: %w", name, err)
		}
		return f.Close()
	}
	var buf []byte
	if err := write("sections.csv", func(w *bufio.Writer) {
		w.WriteString("from,to,dh_m,length_km\n")
		for _, s := range n.Sections {
			buf = append(buf[:0], s.From...)
			buf = append(buf, ',')
			buf = append(buf, s.To...)
			buf = append(buf, ',')
			buf = strconv.AppendFloat(buf, s.DhM, 'f', 5, 64)
			buf = append(buf, ',')
			buf = strconv.AppendFloat(buf, s.LengthKm, 'f', 3, 64)
			buf = append(buf, '\n')
			w.Write(buf)
		}
	}); err != nil {
		return err
	}
	heights := func(name string, ids []int) error {
		return write(name, func(w *bufio.Writer) {
			w.WriteString("point,height_m\n")
			for _, i := range ids {
				fmt.Fprintf(w, "%s,%.5f\n", n.Points[i], n.Truth[i])
			}
		})
	}
	if err := heights("held.csv", n.Held); err != nil {
		return err
	}
	all := make([]int, len(n.Points))
	for i := range all {
		all[i] = i
	}
	return heights("truth.csv", all)
}
