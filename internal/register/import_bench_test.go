package register_test

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	"golang.org/x/sync/errgroup"

	"cairn/internal/auditcache"
	"cairn/internal/pgtest"
	. "cairn/internal/register"
	"cairn/internal/registertest"
	"cairn/internal/store"
)

// importBenchFiles writes a generated register of marks marks, 5 height
// versions and 3 condition reports each (the proportions of issue 14's
// 1,000,000 marks, 5,000,000 versions and 3,000,000 reports), in the
// layout of docs/import.md, to a new folder.
func importBenchFiles(b *testing.B, marks int) string {
	b.Helper()
	return importBenchFilesFrom(b, 0, marks)
}

// importBenchFilesFrom is importBenchFiles of the marks numbered from
// first.
func importBenchFilesFrom(b *testing.B, first, marks int) string {
	b.Helper()
	dir := b.TempDir()
	write := func(name, header string, row func(w *bufio.Writer, i int)) {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			b.Fatal(err)
		}
		w := bufio.NewWriter(f)
		w.WriteString(header + "\n")
		for i := first; i < first+marks; i++ {
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
	marks := envInt(b, "CAIRN_BENCH_IMPORT_MARKS", 2000)
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
// per version. floor is the SQL floor of workers=cpu in the same run: the
// same rows read bare (the audit's queries, binary rows, nothing decoded),
// over as many connections on one snapshot, split alike; floor-join and
// floor-ids the floors of other ways of reading them, for comparison.
//
// CAIRN_BENCH_AUDIT_CHAIN_DB names a register kept on the test server to
// measure instead (nothing is imported or written; it is left as it is):
// a larger one, built once. When there is no database of that name, it
// is made (CAIRN_BENCH_AUDIT_CHAIN_MARKS marks imported, then VACUUM
// ANALYZE) and left there for later runs; whoever asked for it drops it.
func BenchmarkAuditChains(b *testing.B) {
	var fx *registertest.Bundle
	versions := 0
	if name := os.Getenv("CAIRN_BENCH_AUDIT_CHAIN_DB"); name != "" {
		db := pgtest.Existing(b, name)
		if db == nil {
			// Built once: imported, then analyzed as autovacuum would
			// (the test server runs without it), and left on the server.
			fx = registertest.On(b, pgtest.Kept(b, name))
			fx.Datum(b, registertest.DatumOpts{})
			if _, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: importBenchFiles(b, envInt(b, "CAIRN_BENCH_AUDIT_CHAIN_MARKS", 20000)), RecordedBy: "bench"}); err != nil {
				b.Fatal(err)
			}
			if _, err := fx.DB.Pool.Exec(fx.Ctx, "VACUUM ANALYZE"); err != nil {
				b.Fatal(err)
			}
		} else {
			fx = registertest.On(b, db)
		}
		if err := fx.DB.Pool.QueryRow(fx.Ctx, "SELECT count(*) FROM height").Scan(&versions); err != nil {
			b.Fatal(err)
		}
	} else {
		marks := envInt(b, "CAIRN_BENCH_AUDIT_CHAIN_MARKS", 20000)
		fx = registertest.Setup(b)
		fx.Datum(b, registertest.DatumOpts{})
		if _, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: importBenchFiles(b, marks), RecordedBy: "bench"}); err != nil {
			b.Fatal(err)
		}
		versions = 5 * marks
	}
	dbName := fx.DB.Pool.Config().ConnConfig.Database
	var cpu0 [2]time.Duration
	cpuStart := func() { cpu0 = [2]time.Duration{processCPU(b), backendsCPU(b, dbName)} }
	perVersion := func(b *testing.B, n int) {
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(n)/1000, "µs/version")
		b.ReportMetric(float64((processCPU(b)-cpu0[0]).Nanoseconds())/float64(n)/1000, "go-cpu-µs/version")
		b.ReportMetric(float64((backendsCPU(b, dbName)-cpu0[1]).Nanoseconds())/float64(n)/1000, "server-cpu-µs/version")
	}
	for _, w := range []struct {
		name    string
		workers int
	}{{"workers=1", 1}, {"workers=cpu", runtime.GOMAXPROCS(0)}} {
		b.Run(w.name, func(b *testing.B) {
			defer SetAuditSplit(w.workers, 1000)()
			n := 0
			cpuStart()
			for b.Loop() {
				rep, err := fx.Reg.AuditChains(fx.Ctx)
				if err != nil || len(rep.Breaks) != 0 || rep.Versions != versions {
					b.Fatalf("audit: %v, %d breaks, %d versions (want %d)", err, len(rep.Breaks), rep.Versions, versions)
				}
				n += rep.Versions
			}
			perVersion(b, n)
		})
	}
	// The floors, each the bare read of one way of sending the rows:
	// floor, the audit's own (each chunk's marks' designations, then its
	// versions without them); floor-join, the designation joined to every
	// version (the audit until schema v25's code); floor-ids, the versions'
	// ids alone in the same order (what the index scan costs).
	for _, f := range []struct {
		name    string
		queries []string
	}{
		{"floor", []string{"SELECT m.id, m.designation FROM mark m WHERE m.id BETWEEN $1 AND $2 ORDER BY m.id",
			`SELECT h.id, h.mark_id, h.datum_id, h.version, h.supersedes,
				h.value::text, h.unit, h.decimals, h.class, h.source_kind, h.source, h.adjustment_id,
				h.reason, h.recorded_by, h.recorded_role, h.recorded_at, h.in_force_from, h.hash
				FROM height h WHERE h.mark_id BETWEEN $1 AND $2 ORDER BY h.mark_id, h.datum_id, h.version`}},
		{"floor-join", []string{`SELECT h.id, h.mark_id, m.designation, h.datum_id, h.version, h.supersedes,
				h.value::text, h.unit, h.decimals, h.class, h.source_kind, h.source, h.adjustment_id,
				h.reason, h.recorded_by, h.recorded_role, h.recorded_at, h.in_force_from, h.hash
				FROM height h JOIN mark m ON m.id = h.mark_id
				WHERE h.mark_id BETWEEN $1 AND $2 ORDER BY h.mark_id, h.datum_id, h.version`}},
		{"floor-ids", []string{"SELECT h.id FROM height h WHERE h.mark_id BETWEEN $1 AND $2 ORDER BY h.mark_id, h.datum_id, h.version"}},
	} {
		b.Run(f.name, func(b *testing.B) {
			n := 0
			cpuStart()
			for b.Loop() {
				got, err := auditChainsFloor(fx, runtime.GOMAXPROCS(0), f.queries)
				if err != nil || got != versions {
					b.Fatalf("floor: %v, %d rows (want %d)", err, got, versions)
				}
				n += got
			}
			perVersion(b, n)
		})
	}
}

// processCPU is the CPU time this process has used (user and system,
// getrusage(2)).
func processCPU(b *testing.B) time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		b.Fatal(err)
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// backendsCPU is the CPU time used so far by the server's processes
// connected to database db, read from /proc/PID/stat (proc(5): utime and
// stime, fields 14 and 15, in clock ticks of 1/100 s here) of the
// processes whose title names the database ("postgres: ... db ...",
// PostgreSQL's update_process_title): the server runs on this machine for
// the benchmarks. The pool's connections live through a benchmark, so
// the difference of two readings is the server's CPU for what ran
// between them; 0 when the server's processes cannot be seen.
func backendsCPU(b *testing.B, db string) time.Duration {
	dirs, err := os.ReadDir("/proc")
	if err != nil {
		return 0
	}
	var ticks int64
	for _, d := range dirs {
		if d.Name()[0] < '0' || d.Name()[0] > '9' {
			continue
		}
		cmd, err := os.ReadFile("/proc/" + d.Name() + "/cmdline")
		if err != nil || !bytes.HasPrefix(cmd, []byte("postgres: ")) || !bytes.Contains(cmd, []byte(" "+db+" ")) {
			continue
		}
		st, err := os.ReadFile("/proc/" + d.Name() + "/stat")
		if err != nil {
			continue
		}
		// The fields after the command's name in parentheses.
		f := strings.Fields(string(st[bytes.LastIndexByte(st, ')')+1:]))
		if len(f) < 13 {
			continue
		}
		u, _ := strconv.ParseInt(f[11], 10, 64)
		k, _ := strconv.ParseInt(f[12], 10, 64)
		ticks += u + k
	}
	return time.Duration(ticks) * 10 * time.Millisecond
}

// auditChainsFloor runs queries (their last one's rows are the versions,
// which it counts; the ones before it are read too) as the audit of the
// chains reads its rows: in its order, split by mark id among workers
// transactions on one exported snapshot, in chunks of store.ChainChunk
// mark ids, as binary rows left undecoded, in the audit's sessions
// (TxNoJIT, ChainSession: the same plans).
func auditChainsFloor(fx *registertest.Bundle, workers int, queries []string) (int, error) {
	ctx := fx.Ctx
	lead, err := fx.DB.Pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
	if err != nil {
		return 0, err
	}
	defer lead.Rollback(ctx)
	var snap string
	var lo, hi int64
	if err := lead.QueryRow(ctx, "SELECT pg_export_snapshot(), coalesce(min(id), 0), coalesce(max(id), 0) FROM mark").Scan(&snap, &lo, &hi); err != nil {
		return 0, err
	}
	if err := store.TxNoJIT(ctx, lead); err != nil {
		return 0, err
	}
	if err := store.ChainSession(ctx, lead); err != nil {
		return 0, err
	}
	counts := make([]int, workers)
	width := (hi - lo + int64(workers)) / int64(workers)
	g, gctx := errgroup.WithContext(ctx)
	for i := range workers {
		g.Go(func() error {
			tx := lead
			if i > 0 {
				t, err := fx.DB.Pool.BeginTx(gctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly})
				if err != nil {
					return err
				}
				defer t.Rollback(gctx)
				if _, err := t.Exec(gctx, "SET TRANSACTION SNAPSHOT '"+snap+"'"); err != nil {
					return err
				}
				if err := store.TxNoJIT(gctx, t); err != nil {
					return err
				}
				if err := store.ChainSession(gctx, t); err != nil {
					return err
				}
				tx = t
			}
			first, last := lo+int64(i)*width, min(lo+int64(i+1)*width-1, hi)
			for from := first; from <= last; from += store.ChainChunk {
				to := min(from+store.ChainChunk-1, last)
				for k, q := range queries {
					rows, err := tx.Query(gctx, q, pgx.QueryResultFormats{pgx.BinaryFormatCode}, from, to)
					if err != nil {
						return err
					}
					for rows.Next() {
						if k == len(queries)-1 {
							counts[i]++
						}
					}
					if err := rows.Err(); err != nil {
						return err
					}
				}
			}
			return nil
		})
	}
	err = g.Wait()
	total := 0
	for _, c := range counts {
		total += c
	}
	return total, err
}

// BenchmarkAuditSince is the incremental audit after a large write: a
// register of 20,000 imported marks (100,000 versions), a statement made,
// then 10,000 marks more imported (50,000 versions, the size of a large
// publication), and the audit since the statement: since, its evidence
// (the commits after it) and its chains (those with a version written
// since); since-all, all of audit verify --since after reading the
// statement: those (the evidence read while the chains are, as the
// command does), the runs and adjustments since (none here) and the
// schema compared with the audit's cache; derive-schema, those last two
// alone; whole, the whole register's
// evidence and chains for comparison.
func BenchmarkAuditSince(b *testing.B) {
	fx := registertest.Setup(b)
	fx.Datum(b, registertest.DatumOpts{})
	if _, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: importBenchFilesFrom(b, 0, 20000), RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	stmt, _, err := fx.Reg.MakeStatement(fx.Ctx, "bench", nil)
	if err != nil {
		b.Fatal(err)
	}
	if _, err := fx.Reg.Import(fx.Ctx, ImportParams{Dir: importBenchFilesFrom(b, 20000, 10000), RecordedBy: "bench"}); err != nil {
		b.Fatal(err)
	}
	xid, err := fx.Reg.StatementXid(fx.Ctx, stmt)
	if err != nil {
		b.Fatal(err)
	}
	b.Run("since", func(b *testing.B) {
		for b.Loop() {
			ev, err := fx.Reg.EvidenceVerifySince(fx.Ctx, stmt)
			if err != nil || len(ev.Breaks) != 0 || ev.Commits != 1 {
				b.Fatalf("evidence since: %v, %d commits, %+v", err, ev.Commits, ev.Breaks)
			}
			rep, err := fx.Reg.AuditChainsSince(fx.Ctx, &xid)
			if err != nil || len(rep.Breaks) != 0 || rep.Versions != 50000 {
				b.Fatalf("chains since: %v, %d versions, %+v", err, rep.Versions, rep.Breaks)
			}
		}
	})
	b.Run("since-all", func(b *testing.B) {
		fx.Reg.UseSchemaCache(auditcache.Dir{Path: cacheDir})
		if _, err := fx.Reg.AuditVerifySince(fx.Ctx, xid, nil); err != nil { // the cache filled
			b.Fatal(err)
		}
		for b.Loop() {
			ForgetFreshSchemas()
			xid, err := fx.Reg.StatementXid(fx.Ctx, stmt)
			if err != nil {
				b.Fatal(err)
			}
			// As cairn audit verify --since: the evidence meanwhile.
			type evidence struct {
				rep EvidenceReport
				err error
			}
			evc := make(chan evidence, 1)
			go func() {
				ev, err := fx.Reg.EvidenceVerifySince(fx.Ctx, stmt)
				evc <- evidence{ev, err}
			}()
			rep, err := fx.Reg.AuditVerifySince(fx.Ctx, xid, nil)
			ev := <-evc
			if ev.err != nil || len(ev.rep.Breaks) != 0 || ev.rep.Commits != 1 {
				b.Fatalf("evidence since: %v, %d commits, %+v", ev.err, ev.rep.Commits, ev.rep.Breaks)
			}
			if err != nil || rep.Count() != 0 || rep.Versions != 50000 || rep.SchemaFrom != SchemaFromCache {
				b.Fatalf("audit since: %v, %d versions, schema from %q, %+v %+v", err, rep.Versions, rep.SchemaFrom, rep.Breaks, rep.Findings)
			}
		}
	})
	b.Run("derive-schema", func(b *testing.B) {
		for b.Loop() {
			ForgetFreshSchemas()
			rep, err := fx.Reg.AuditDeriveSince(fx.Ctx, xid)
			if err != nil || rep.Count() != 0 || rep.SchemaFrom != SchemaFromCache {
				b.Fatalf("derive since: %v, schema from %q, %+v", err, rep.SchemaFrom, rep.Findings)
			}
		}
	})
	b.Run("whole", func(b *testing.B) {
		for b.Loop() {
			ev, err := fx.Reg.EvidenceVerify(fx.Ctx, nil)
			if err != nil || len(ev.Breaks) != 0 {
				b.Fatalf("evidence: %v, %+v", err, ev.Breaks)
			}
			rep, err := fx.Reg.AuditChainsSince(fx.Ctx, nil)
			if err != nil || len(rep.Breaks) != 0 || rep.Versions != 150000 {
				b.Fatalf("chains: %v, %d versions, %+v", err, rep.Versions, rep.Breaks)
			}
		}
	})
}

// cacheDir is the benchmarks' audit cache, removed by TestMain.
var cacheDir string

func TestMain(m *testing.M) {
	d, err := os.MkdirTemp("", "cairn-bench-cache-")
	if err != nil {
		panic(err)
	}
	cacheDir = d
	code := m.Run()
	os.RemoveAll(d)
	os.Exit(code)
}
