// Package booktest writes level books for tests and benchmarks: long, valid,
// deterministic loops over invented Tallis County marks, in cairn's
// level-book format (docs/levelbook.md).
package booktest

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
)

// Loop describes a generated level loop: Setups setups from its first mark
// through turning points and further marks (one every MarkEvery setups)
// and back to the first mark. Every sight is 30 m long by stadia, with
// three wires whose half-intervals agree exactly, so the book passes every
// check of class second-II; the foresights are chosen so that the loop
// closes within half a millimetre.
type Loop struct {
	// Name is the run's name in the book's metadata.
	Name string
	// Setups is the number of setups (at least 2).
	Setups int
	// MarkEvery puts a mark every so many setups; 0 means 50.
	MarkEvery int
	// FirstMark numbers the marks: designations run TC-1001, TC-1002, ...
	// when it is 0 (the default 1001).
	FirstMark int
	// Designations, when set, name the marks instead (one for every
	// MarkEvery setups, rounded up), for a loop over marks a register
	// holds already.
	Designations []string
	// Seed chooses the readings.
	Seed uint64
}

func (l Loop) markEvery() int {
	if l.MarkEvery <= 0 {
		return 50
	}
	return l.MarkEvery
}

// Marks returns the designations of the loop's marks in the order it
// visits them; it closes on the first again.
func (l Loop) Marks() []string {
	n := (l.Setups + l.markEvery() - 1) / l.markEvery()
	if l.Designations != nil {
		if len(l.Designations) != n {
			panic(fmt.Sprintf("booktest: %d designations for a loop of %d marks", len(l.Designations), n))
		}
		return l.Designations
	}
	first := l.FirstMark
	if first == 0 {
		first = 1001
	}
	ms := make([]string, n)
	for i := range ms {
		ms[i] = fmt.Sprintf("TC-%04d", first+i)
	}
	return ms
}

// Sections returns the number of sections of the loop (one per mark).
func (l Loop) Sections() int { return len(l.Marks()) }

// Book returns the level book as CSV bytes with LF line ends.
func (l Loop) Book() []byte {
	if l.Setups < 2 {
		panic("booktest: a loop needs at least two setups")
	}
	e, n := l.markEvery(), l.Setups
	marks := l.Marks()
	rng := rand.New(rand.NewPCG(l.Seed, 0x7a11150))
	// point names the i-th point of the loop, 0 ≤ i ≤ n (n is the start
	// again); every e-th is a mark.
	point := func(i int) string {
		switch {
		case i == n:
			return marks[0]
		case i%e == 0:
			return marks[i/e]
		}
		return fmt.Sprintf("TP%d", i-i/e)
	}
	// ground is the height the loop aims at on point i: a few gentle waves
	// with some roughness, 0 at both ends.
	ground := func(i int) float64 {
		if i == 0 || i == n {
			return 0
		}
		return 12*math.Sin(6*math.Pi*float64(i)/float64(n)) + 0.6*(rng.Float64()-0.5)
	}
	name := l.Name
	if name == "" {
		name = fmt.Sprintf("Generated loop of %d setups", n)
	}
	var b bytes.Buffer
	fmt.Fprintf(&b, "# run: %s\n", name)
	b.WriteString("# date: 2026-04-14\n# crew: generated\n# instrument: generated\n# units: m\n# class: second-II\n")
	b.WriteString("point,sight,upper,middle,lower,note\n")
	row := func(p, sight string, mm int) {
		// Half-interval 0.150 m: 30.0 m by stadia (factor 100).
		fmt.Fprintf(&b, "%s,%s,%.3f,%.3f,%.3f,\n", p, sight, float64(mm+150)/1000, float64(mm)/1000, float64(mm-150)/1000)
	}
	h := 0 // booked height of the current point, mm
	for i := 0; i < n; i++ {
		bs := 1200 + rng.IntN(1000)
		fs := bs + h - int(math.Round(ground(i+1)*1000))
		row(point(i), "BS", bs)
		row(point(i+1), "FS", fs)
		h += bs - fs
	}
	return b.Bytes()
}

// Line describes a generated level line: from Marks[0] through each of
// Marks in turn to the last, section i (Marks[i] to Marks[i+1]) rising by
// DhM[i] metres over about LengthM[i] metres of levelling. Each section is
// levelled by enough setups through turning points that every sight is at
// most 50 m by stadia (three wires whose half-intervals agree exactly, at
// whole millimetres) and no setup rises more than 2.5 m; backsight and
// foresight of each setup are equal, so the book passes the checks of
// class second-II. A section's difference is DhM rounded to the
// millimetre.
type Line struct {
	// Name is the run's name in the book's metadata; Date its date
	// (default 2026-04-14).
	Name, Date string
	Marks      []string
	DhM        []float64
	LengthM    []float64
	// Seed chooses the readings.
	Seed uint64
}

// Book returns the line's level book as CSV bytes with LF line ends.
func (l Line) Book() []byte {
	if len(l.Marks) < 2 || len(l.DhM) != len(l.Marks)-1 || len(l.LengthM) != len(l.DhM) {
		panic("booktest: a line needs two marks or more, and a difference and a length for each section")
	}
	rng := rand.New(rand.NewPCG(l.Seed, 0x11e))
	name := l.Name
	if name == "" {
		name = fmt.Sprintf("Generated line from %s to %s", l.Marks[0], l.Marks[len(l.Marks)-1])
	}
	date := l.Date
	if date == "" {
		date = "2026-04-14"
	}
	var b bytes.Buffer
	fmt.Fprintf(&b, "# run: %s\n# date: %s\n", name, date)
	b.WriteString("# crew: generated\n# instrument: generated\n# units: m\n# class: second-II\n")
	b.WriteString("point,sight,upper,middle,lower,note\n")
	row := func(p, sight string, mm, half int) {
		fmt.Fprintf(&b, "%s,%s,%.3f,%.3f,%.3f,\n", p, sight, float64(mm+half)/1000, float64(mm)/1000, float64(mm-half)/1000)
	}
	tp := 0
	for i, dh := range l.DhM {
		d := int(math.Round(dh * 1000))
		k := max(1, (abs(d)+2499)/2500, int(math.Ceil(l.LengthM[i]/100)))
		// Half-interval in mm of a sight of length/(2k) metres (factor 100:
		// sight = 200 × half), at most 50 m.
		half := max(5, min(250, int(math.Round(l.LengthM[i]/float64(2*k)*5))))
		from := l.Marks[i]
		for j := range k {
			step := d*(j+1)/k - d*j/k
			bs := 2000 + step/2 + rng.IntN(201) - 100
			to := l.Marks[i+1]
			if j < k-1 {
				tp++
				to = fmt.Sprintf("TP%d", tp)
			}
			row(from, "BS", bs, half)
			row(to, "FS", bs-step, half)
			from = to
		}
	}
	return b.Bytes()
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}
