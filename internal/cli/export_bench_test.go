package cli

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"strconv"
	"strings"
	"testing"

	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/registertest"
)

// countingWriter counts the bytes written to it and keeps none.
type countingWriter struct{ n int64 }

func (w *countingWriter) Write(p []byte) (int, error) { w.n += int64(len(p)); return len(p), nil }

// exportBenchRegister imports a generated register of marks marks, each
// with a position, one alias, one height version and one good report
// (cairn import, not timed).
func exportBenchRegister(b testing.TB, marks int) string {
	b.Helper()
	dir := b.TempDir()
	write := func(name, header string, row func(w *bufio.Writer, i int)) {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			b.Fatal(err)
		}
		w := bufio.NewWriter(f)
		w.WriteString(header + "\n")
		for i := range marks {
			row(w, i)
		}
		if err := w.Flush(); err != nil {
			b.Fatal(err)
		}
		f.Close()
	}
	write(register.MarksFile, "designation,aliases,type,setting,stamping,directions,lat,lon,by", func(w *bufio.Writer, i int) {
		fmt.Fprintf(w, "TC-%07d,former:OLD-%d,brass disk,concrete post,TC %d,north verge of the county road,%.5f,%.5f,bench\n",
			i, i, i, 39+float64(i%10000)/10000, -104-float64(i/10000)/10000)
	})
	write(register.ConditionsFile, "mark,observed_on,condition,note,by", func(w *bufio.Writer, i int) {
		fmt.Fprintf(w, "TC-%07d,2019-03-14,good,,bench\n", i)
	})
	write(register.HeightsFile, "mark,datum,kind,value,unit,decimals,class,in_force_from,source,reason,by", func(w *bufio.Writer, i int) {
		fmt.Fprintf(w, "TC-%07d,NAVD88,authority,%d.%03d,m,3,,2019-06-01,Tallis County book 2019,from the book,bench\n", i, 1700+i%100, i%1000)
	})
	db := pgtest.New(b)
	fx := registertest.On(b, db)
	fx.Datum(b, registertest.DatumOpts{})
	if _, err := fx.Reg.Import(fx.Ctx, register.ImportParams{Dir: dir, RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	// What autovacuum does to a register in use: statistics for the
	// planner, the visibility map and hint bits set. Without it the first
	// read after a bulk import pays for them (measured 2026-12-03, 100,000
	// marks: the first export 79 s, the next 15 s).
	if _, err := db.Pool.Exec(fx.Ctx, "VACUUM (ANALYZE)"); err != nil {
		b.Fatal(err)
	}
	return db.URL
}

// BenchmarkExportFormat runs `cairn export --format geojson|csv --out -`
// in this process over a generated register of CAIRN_BENCH_EXPORT_MARKS
// marks (default 10,000), each with one height: file-MB is the size of
// the file written, B/op what Go allocated for it, and peak-MB the
// process's peak resident memory (VmHWM) during the export alone (reset
// after the register is built, /proc/self/clear_refs). The heap at the
// start, after the build, is start-MB. The register is vacuumed and
// analyzed after it is built, as autovacuum keeps a register in use.
func BenchmarkExportFormat(b *testing.B) {
	marks := benchMarks(b)
	url := exportBenchRegister(b, marks)
	for _, format := range []string{"geojson", "csv"} {
		b.Run(format, func(b *testing.B) {
			runtime.GC()
			debug.FreeOSMemory()
			start := vmKB(b, "VmRSS:")
			if err := os.WriteFile("/proc/self/clear_refs", []byte("5"), 0); err != nil {
				b.Fatalf("reset the peak resident memory: %v", err)
			}
			b.ReportAllocs()
			var out countingWriter
			for b.Loop() {
				out.n = 0
				var errOut bytes.Buffer
				ios := newStreams(strings.NewReader(""), &out, io.Discard, false)
				ios.ErrOut = &errOut
				f := NewFactory(ios, "bench")
				err := Execute(context.Background(), f, []string{"--db", url, "export", "--format", format, "--out", "-"})
				f.Close()
				if err != nil || !strings.Contains(errOut.String(), fmt.Sprintf(" %d mark(s)", marks)) {
					b.Fatalf("export: %v: %s", err, errOut.String())
				}
			}
			b.ReportMetric(float64(out.n)/1e6, "file-MB")
			b.ReportMetric(vmKB(b, "VmHWM:")/1024, "peak-MB")
			b.ReportMetric(start/1024, "start-MB")
		})
	}
}

// benchMarks is CAIRN_BENCH_EXPORT_MARKS, the marks of the export and
// listing benchmarks' register (default 10,000).
func benchMarks(b *testing.B) int {
	s := os.Getenv("CAIRN_BENCH_EXPORT_MARKS")
	if s == "" {
		return 10000
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < 1 {
		b.Fatalf("CAIRN_BENCH_EXPORT_MARKS=%q: want a number of marks", s)
	}
	return n
}

// vmKB is a line of /proc/self/status, in kB.
func vmKB(b *testing.B, key string) float64 {
	st, err := os.ReadFile("/proc/self/status")
	if err != nil {
		b.Fatal(err)
	}
	for _, line := range strings.Split(string(st), "\n") {
		if f := strings.Fields(line); len(f) == 3 && f[0] == key {
			kb, err := strconv.ParseFloat(f[1], 64)
			if err != nil {
				b.Fatal(err)
			}
			return kb
		}
	}
	b.Fatalf("no %s in /proc/self/status", key)
	return 0
}

// BenchmarkListAll lists the whole of a generated register of
// CAIRN_BENCH_EXPORT_MARKS marks (default 10,000) with mark list and
// height list, -o csv and -o json, in this process: peak-MB is the
// process's peak resident memory during the listing alone (VmHWM reset
// after the build), which the listings' pages (register.ListPageSize
// marks) bound whatever the register's size.
func BenchmarkListAll(b *testing.B) {
	marks := benchMarks(b)
	url := exportBenchRegister(b, marks)
	for _, c := range [][]string{{"mark", "list", "-o", "csv"}, {"mark", "list", "-o", "json"}, {"height", "list", "-o", "csv"}, {"height", "list", "-o", "json"}} {
		b.Run(strings.Join(c, "-"), func(b *testing.B) {
			runtime.GC()
			debug.FreeOSMemory()
			if err := os.WriteFile("/proc/self/clear_refs", []byte("5"), 0); err != nil {
				b.Fatalf("reset the peak resident memory: %v", err)
			}
			b.ReportAllocs()
			var out countingWriter
			for b.Loop() {
				out.n = 0
				ios := newStreams(strings.NewReader(""), &out, io.Discard, false)
				f := NewFactory(ios, "bench")
				err := Execute(context.Background(), f, append([]string{"--db", url}, c...))
				f.Close()
				if err != nil || out.n < int64(marks) {
					b.Fatalf("%v: %v, %d bytes", c, err, out.n)
				}
			}
			b.ReportMetric(float64(out.n)/1e6, "out-MB")
			b.ReportMetric(vmKB(b, "VmHWM:")/1024, "peak-MB")
		})
	}
}

// TestListingsInPages: the listings of the whole register are read and
// written a page of register.ListPageSize marks at a time; over 2,500
// marks (three pages) every mark comes once, in designation order, and
// each output is one well-formed document: a JSON array, a CSV file with
// one header (encoding/csv), a FeatureCollection, a piped table with one
// header line.
func TestListingsInPages(t *testing.T) {
	t.Parallel()
	const marks = 2500
	url := exportBenchRegister(t, marks)
	want := func(i int) string { return fmt.Sprintf("TC-%07d", i) }

	var ms []struct {
		Designation string `json:"mark"`
	}
	if err := json.Unmarshal([]byte(mustRun(t, url, "mark", "list", "-o", "json")), &ms); err != nil || len(ms) != marks {
		t.Fatalf("mark list -o json: %v, %d marks", err, len(ms))
	}
	for i, m := range ms {
		if m.Designation != want(i) {
			t.Fatalf("mark list -o json: mark %d is %s, want %s", i, m.Designation, want(i))
		}
	}
	recs, err := csv.NewReader(strings.NewReader(mustRun(t, url, "height", "list", "-o", "csv"))).ReadAll()
	if err != nil || len(recs) != marks+1 || recs[0][0] != "mark" {
		t.Fatalf("height list -o csv: %v, %d records, header %v", err, len(recs), recs[0])
	}
	for i, r := range recs[1:] {
		if r[0] != want(i) {
			t.Fatalf("height list -o csv: row %d is %s, want %s", i+1, r[0], want(i))
		}
	}
	var fc struct {
		Type     string            `json:"type"`
		Features []json.RawMessage `json:"features"`
	}
	if err := json.Unmarshal([]byte(mustRun(t, url, "height", "list", "-o", "geojson")), &fc); err != nil || fc.Type != "FeatureCollection" || len(fc.Features) != marks {
		t.Fatalf("height list -o geojson: %v, %s of %d features", err, fc.Type, len(fc.Features))
	}
	lines := strings.Split(strings.TrimSuffix(mustRun(t, url, "mark", "list"), "\n"), "\n")
	if len(lines) != marks+1 || !strings.HasPrefix(lines[0], "designation\t") || !strings.HasPrefix(lines[marks], want(marks-1)+"\t") {
		t.Fatalf("mark list, piped: %d lines, first %q", len(lines), lines[0])
	}
	var hs []json.RawMessage
	if err := json.Unmarshal([]byte(mustRun(t, url, "height", "list", "--datum", "NAVD88", "--as-of", "2020-01-01", "-o", "json")), &hs); err != nil || len(hs) != marks {
		t.Fatalf("height list --as-of -o json: %v, %d heights", err, len(hs))
	}
}
