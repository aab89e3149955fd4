package register_test

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"syscall"
	"testing"

	. "cairn/internal/register"
	"cairn/internal/registertest"
)

// importBenchFiles writes a generated register of marks marks, 5 height
// versions and 3 condition reports each (the proportions of issue 14's
// 1,000,000 marks, 5,000,000 versions and 3,000,000 reports), in the
// layout of docs/import.md, to a new folder.
func importBenchFiles(b *testing.B, marks int) string {
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
	write(MarksFile, "designation,aliases,type,setting,stamping,directions,lat,lon,by", func(w *bufio.Writer, i int) {
		fmt.Fprintf(w, "TC-%07d,former:OLD-%d,brass disk,concrete post,TC %d,north verge of the county road,%.5f,%.5f,bench\n",
			i, i, i, 39+float64(i%10000)/10000, -104-float64(i/10000)/10000)
	})
	write(ConditionsFile, "mark,observed_on,condition,note,by", func(w *bufio.Writer, i int) {
		for _, d := range []string{"1994-06-01", "2008-10-02", "2019-03-14"} {
			fmt.Fprintf(w, "TC-%07d,%s,good,,bench\n", i, d)
		}
	})
	write(HeightsFile, "mark,datum,kind,value,unit,decimals,class,in_force_from,source,reason,by", func(w *bufio.Writer, i int) {
		for k, y := range []int{1960, 1975, 1994, 2008, 2019} {
			fmt.Fprintf(w, "TC-%07d,NAVD88,authority,%d.%03d,m,3,,%d-06-01,Tallis County book %d,from the book,bench\n", i, 1700+i%100, k, y, y)
		}
	})
	return dir
}

// BenchmarkImport imports a generated register into an empty one: marks
// from CAIRN_BENCH_IMPORT_MARKS (default 2,000), each with 5 height
// versions and 3 condition reports. It reports the process's peak
// resident memory (maxrss_MB, the whole test process) besides Go's
// allocations.
func BenchmarkImport(b *testing.B) {
	marks := 2000
	if s := os.Getenv("CAIRN_BENCH_IMPORT_MARKS"); s != "" {
		n, err := strconv.Atoi(s)
		if err != nil || n < 1 {
			b.Fatalf("CAIRN_BENCH_IMPORT_MARKS=%q: want a number of marks", s)
		}
		marks = n
	}
	dir := importBenchFiles(b, marks)
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		fx := registertest.Setup(b)
		fx.Datum(b, registertest.DatumOpts{})
		b.StartTimer()
		res, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: dir, RecordedBy: "bench"})
		if err != nil {
			b.Fatal(err)
		}
		if res.Counts.Marks != int64(marks) || res.Counts.Heights != int64(5*marks) || res.Counts.Conditions != int64(3*marks) {
			b.Fatalf("imported %+v, want %d marks", res.Counts, marks)
		}
	}
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err == nil {
		b.ReportMetric(float64(ru.Maxrss)/1024, "maxrss_MB")
	}
}

// BenchmarkAuditChains recomputes the hash chains of a register imported
// from importBenchFiles (marks from CAIRN_BENCH_AUDIT_CHAIN_MARKS,
// default 20,000, five versions each), in one transaction (workers=1)
// and divided among one worker per CPU (workers=cpu). It reports the time
// per version.
func BenchmarkAuditChains(b *testing.B) {
	marks := 20000
	if s := os.Getenv("CAIRN_BENCH_AUDIT_CHAIN_MARKS"); s != "" {
		n, err := strconv.Atoi(s)
		if err != nil || n < 1 {
			b.Fatalf("CAIRN_BENCH_AUDIT_CHAIN_MARKS=%q: want a number of marks", s)
		}
		marks = n
	}
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	if _, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: importBenchFiles(b, marks), RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	for _, w := range []struct {
		name    string
		workers int
	}{{"workers=1", 1}, {"workers=cpu", runtime.GOMAXPROCS(0)}} {
		b.Run(w.name, func(b *testing.B) {
			defer SetAuditSplit(w.workers, 1000)()
			var versions int
			for b.Loop() {
				rep, err := fx.Reg.AuditChains(fx.Ctx)
				if err != nil || len(rep.Breaks) != 0 || rep.Versions != 5*marks {
					b.Fatalf("audit: %v, %d breaks, %d versions", err, len(rep.Breaks), rep.Versions)
				}
				versions += rep.Versions
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(versions)/1000, "µs/version")
		})
	}
}
