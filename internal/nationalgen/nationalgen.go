// Package nationalgen writes an invented register of any size in the
// import layout (docs/import.md), for the national-scale benchmarks: marks
// named TC-0000000, TC-0000001, ... spread over about 600 × 700 km of an
// invented Tallis County region, each with an alias, a position, three
// condition reports and five published heights over sixty years, the
// proportions of a state agency's register. `cairn import` of the files is
// the documented bulk path: every row goes through the register's own
// triggers, hash chains and in-force dates included (docs/import.md).
//
// The files are written row by row through buffered writers, so memory
// does not grow with the number of marks. The same count and seed give
// the same bytes.
package nationalgen

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
)

// Layout is what Write makes: the files' names and their rows.
type Layout struct {
	Marks, Conditions, Heights int
}

// Region is the box the marks are spread over, in decimal degrees: about
// 600 km north to south and 700 km east to west at 41° N.
var Region = struct{ South, North, West, East float64 }{38.0, 43.4, -108.0, -99.7}

// Designation is the name of mark i.
func Designation(i int) string { return fmt.Sprintf("TC-%07d", i) }

// position is the position of mark i of n: a grid over Region, row by row,
// jittered by the seed's generator.
func position(i, n int, r *rand.Rand) (lat, lon float64) {
	cols := 1
	for cols*cols < n {
		cols++
	}
	row, col := i/cols, i%cols
	rows := (n + cols - 1) / cols
	lat = Region.South + (float64(row)+r.Float64())/float64(rows)*(Region.North-Region.South)
	lon = Region.West + (float64(col)+r.Float64())/float64(cols)*(Region.East-Region.West)
	return lat, lon
}

// years are the five publications of each mark's height.
var years = []int{1960, 1975, 1994, 2008, 2019}

// Write writes marks.csv, conditions.csv and heights.csv for n marks into
// dir (made if needed; the files must not exist).
func Write(dir string, n int, seed uint64) (Layout, error) {
	if n < 1 {
		return Layout{}, fmt.Errorf("nationalgen: %d marks: want at least 1", n)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return Layout{}, err
	}
	r := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	var out Layout
	err := write(dir, "marks.csv", "designation,aliases,type,setting,stamping,directions,lat,lon,position_source,by", func(w *bufio.Writer) {
		for i := range n {
			lat, lon := position(i, n, r)
			fmt.Fprintf(w, "%s,former:OLD-%d,brass disk,concrete post,TC %d,north verge of county road %d,%.5f,%.5f,map,generator\n",
				Designation(i), i, i, i%997, lat, lon)
			out.Marks++
		}
	})
	if err == nil {
		err = write(dir, "conditions.csv", "mark,observed_on,condition,note,by", func(w *bufio.Writer) {
			for i := range n {
				for _, d := range []string{"1994-06-01", "2008-10-02", "2019-03-14"} {
					fmt.Fprintf(w, "%s,%s,good,,generator\n", Designation(i), d)
					out.Conditions++
				}
			}
		})
	}
	if err == nil {
		err = write(dir, "heights.csv", "mark,datum,kind,value,unit,decimals,class,in_force_from,source,reason,by", func(w *bufio.Writer) {
			for i := range n {
				base := 1500 + r.Float64()*400
				for k, y := range years {
					fmt.Fprintf(w, "%s,NAVD88,authority,%.3f,m,3,second-II,%d-06-01,Tallis County bench book %d,entered from the %d book,generator\n",
						Designation(i), base+float64(k)*0.002, y, y, y)
					out.Heights++
				}
			}
		})
	}
	return out, err
}

func write(dir, name, header string, rows func(w *bufio.Writer)) error {
	f, err := os.OpenFile(filepath.Join(dir, name), os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(f, 1<<20)
	w.WriteString(header + "\n")
	rows(w)
	if err := w.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("write %s: %w", name, err)
	}
	return f.Close()
}
