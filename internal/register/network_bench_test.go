package register_test

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/booktest"
	"cairn/internal/nationalgen"
	"cairn/internal/netgen"
	"cairn/internal/pgtest"
	"cairn/internal/register"
	"cairn/internal/store"
)

// networkPerLine is the number of marks between two junctions of the
// generated network: each line between junctions is one recorded run, so
// that 50,000 marks come in about 3,000 runs of 17 sections, as the
// network of issue 15 (50,638 marks over 2,947 runs).
const networkPerLine = 16

// networkFixture is the register BenchmarkNetwork50k adjusts, with the
// runs and held marks of its network.
type networkFixture struct {
	db    *pgtest.DB
	runs  []int64
	held  []string
	marks int
}

// networkBuildVersion names what buildNetwork makes: change it with the
// build, so that a template built before is not reused.
const networkBuildVersion = "v1"

// networkRegister gives a fresh copy of a register holding a generated
// least-squares network of about `marks` marks (netgen, one run a line
// between junctions, recorded through Record, each line held at both ends
// at their invented heights for its checks), padded to `size` marks by
// the documented bulk path (nationalgen, imported: every mark with five
// published heights over sixty years and three condition reports), and
// the network's held junctions given a new authority height each
// (HeightSet). The network's marks are the first of the import's, so they
// carry a history too. Built once into a template database and copied
// after (pgtest.Built).
func networkRegister(b *testing.B, marks, size int) *networkFixture {
	b.Helper()
	net := netgen.Generate(netgen.Options{Points: marks, PerLine: networkPerLine, Seed: 1})
	size = max(size, len(net.Points))
	name := func(i int) string { return nationalgen.Designation(i) }
	index := map[string]int{}
	for i, p := range net.Points {
		index[p] = i
	}
	per := networkPerLine + 1
	if len(net.Sections)%per != 0 {
		b.Fatalf("netgen: %d sections are not lines of %d", len(net.Sections), per)
	}
	nLines := len(net.Sections) / per
	key := fmt.Sprintf("net_%s_%d_%d", networkBuildVersion, marks, size)
	start := time.Now()
	built := false
	db := pgtest.Built(b, key, func(db *pgtest.DB) error {
		built = true
		ctx := context.Background()
		reg := register.New(db.Pool)
		if _, err := reg.DatumAdd(ctx, register.DatumAddParams{Code: "NAVD88", Name: "North American Vertical Datum of 1988", By: "bench"}); err != nil {
			return err
		}
		dir := filepath.Join(b.TempDir(), "register")
		if _, err := nationalgen.Write(dir, size, 1); err != nil {
			return err
		}
		if _, err := reg.Import(ctx, register.ImportParams{Dir: dir, RecordedBy: "bench"}); err != nil {
			return fmt.Errorf("import %d marks: %w", size, err)
		}
		b.Logf("imported %d marks in %v", size, time.Since(start).Round(time.Second))
		// Two recorders at once; a junction is shared by up to four lines,
		// but every mark exists already (imported), so none is created.
		var wg sync.WaitGroup
		errs := make([]error, 2)
		for w := range 2 {
			wg.Go(func() {
				for l := w; l < nLines && errs[w] == nil; l += 2 {
					secs := net.Sections[l*per : (l+1)*per]
					line := booktest.Line{Name: fmt.Sprintf("Tallis County network line %d", l+1),
						Date: time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC).AddDate(0, 0, l%600).Format("2006-01-02"), Seed: uint64(l)}
					line.Marks = append(line.Marks, name(index[secs[0].From]))
					for _, s := range secs {
						line.Marks = append(line.Marks, name(index[s.To]))
						line.DhM = append(line.DhM, s.DhM)
						line.LengthM = append(line.LengthM, s.LengthKm*1000)
					}
					// The ends held at their invented heights, as booked (the
					// sum of the sections to the millimetre), for the checks.
					sum := 0.0
					for _, d := range line.DhM {
						sum += math.Round(d * 1000)
					}
					from := 1500 + net.Truth[index[secs[0].From]]
					hold := map[string]float64{line.Marks[0]: from, line.Marks[len(line.Marks)-1]: from + sum/1000}
					if _, err := reg.Record(ctx, register.RecordParams{Path: fmt.Sprintf("line-%04d.csv", l+1), Book: line.Book(),
						By: "bench", Hold: hold, AcceptFailedChecks: true, Reason: "generated network"}); err != nil {
						errs[w] = fmt.Errorf("record line %d: %w", l+1, err)
					}
				}
			})
		}
		wg.Wait()
		for _, err := range errs {
			if err != nil {
				return err
			}
		}
		b.Logf("recorded %d runs in %v", nLines, time.Since(start).Round(time.Second))
		// In force from the day after the imported heights' last (2019).
		on := time.Date(2025, 6, 1, 0, 0, 0, 0, time.UTC)
		for _, k := range net.Held {
			if _, err := reg.HeightSet(ctx, register.HeightSetParams{Designation: name(k), Datum: "NAVD88",
				Value: strconv.FormatFloat(1500+net.Truth[k], 'f', 3, 64), Unit: "m", Kind: register.KindAuthority,
				Source: "Tallis County control (invented)", Reason: "control of the network", RecordedBy: "bench", InForceFrom: &on}); err != nil {
				return err
			}
		}
		return nil
	})
	if built {
		b.Logf("built the register (%d network marks in %d runs, %d marks in all) in %v", len(net.Points), nLines, size, time.Since(start).Round(time.Second))
	}
	fx := &networkFixture{db: db, marks: len(net.Points)}
	if err := func() error {
		rows, err := db.Pool.Query(context.Background(), "SELECT id FROM run ORDER BY id")
		if err != nil {
			return err
		}
		fx.runs, err = pgx.CollectRows(rows, pgx.RowTo[int64])
		return err
	}(); err != nil {
		b.Fatal(err)
	}
	for _, k := range net.Held {
		fx.held = append(fx.held, name(k))
	}
	return fx
}

// sqlTimer adds up the time the pool's statements take, from their
// sending to the end of their rows (pgx's tracers), in all and by the
// start of their text (for the slowest list).
type sqlTimer struct {
	mu    sync.Mutex
	total time.Duration
	n     int
	by    map[string]time.Duration
}

type sqlStart struct {
	at  time.Time
	sql string
}

type sqlStartKey struct{}

func (t *sqlTimer) start(ctx context.Context, sql string) context.Context {
	return context.WithValue(ctx, sqlStartKey{}, sqlStart{time.Now(), sql})
}

func (t *sqlTimer) end(ctx context.Context) {
	if s, ok := ctx.Value(sqlStartKey{}).(sqlStart); ok {
		d := time.Since(s.at)
		q := strings.Join(strings.Fields(s.sql), " ")
		t.mu.Lock()
		t.total += d
		t.n++
		if t.by == nil {
			t.by = map[string]time.Duration{}
		}
		t.by[q[:min(len(q), 100)]] += d
		t.mu.Unlock()
	}
}

func (t *sqlTimer) TraceQueryStart(ctx context.Context, _ *pgx.Conn, q pgx.TraceQueryStartData) context.Context {
	return t.start(ctx, q.SQL)
}
func (t *sqlTimer) TraceQueryEnd(ctx context.Context, _ *pgx.Conn, _ pgx.TraceQueryEndData) {
	t.end(ctx)
}
func (t *sqlTimer) TraceCopyFromStart(ctx context.Context, _ *pgx.Conn, c pgx.TraceCopyFromStartData) context.Context {
	return t.start(ctx, "COPY "+c.TableName.Sanitize())
}
func (t *sqlTimer) TraceCopyFromEnd(ctx context.Context, _ *pgx.Conn, _ pgx.TraceCopyFromEndData) {
	t.end(ctx)
}

// reset returns the statements' total time and count since the last
// reset and the slowest eight, and starts again.
func (t *sqlTimer) reset() (time.Duration, int, string) {
	t.mu.Lock()
	defer t.mu.Unlock()
	type kv struct {
		sql string
		d   time.Duration
	}
	var all []kv
	for k, v := range t.by {
		all = append(all, kv{k, v})
	}
	sort.Slice(all, func(i, j int) bool { return all[i].d > all[j].d })
	var b strings.Builder
	for _, e := range all[:min(len(all), 8)] {
		fmt.Fprintf(&b, "\n\t%8.3f s  %s", e.d.Seconds(), e.sql)
	}
	d, n := t.total, t.n
	t.total, t.n, t.by = 0, 0, nil
	return d, n, b.String()
}

// BenchmarkNetwork50k: a least-squares adjustment of a generated network
// of about 50,000 marks (CAIRN_BENCH_NETWORK_MARKS) over about 3,000
// recorded runs, on a register of CAIRN_BENCH_NETWORK_REGISTER marks
// (default 100,000), drafted from the register and published, each
// iteration. Beside each, its SQL floor in the same iteration: the bare
// statements, by pgx, that read what the draft reads and write what it
// stores, and that write what the publication writes (in a transaction
// rolled back). Reported per iteration: draft-s and its statements'
// time draft-sql-s, draft-floor-s; publish-s, publish-sql-s,
// publish-floor-s. Run with
//
//	go test -run XXX -bench Network50k -benchtime 3x -timeout 2h ./internal/register/
//
// The first run builds the register into a template database (minutes);
// later runs copy it.
func BenchmarkNetwork50k(b *testing.B) {
	marks := envInt(b, "CAIRN_BENCH_NETWORK_MARKS", 50000)
	size := envInt(b, "CAIRN_BENCH_NETWORK_REGISTER", 100000)
	fx := networkRegister(b, marks, size)
	ctx := context.Background()
	cfg, err := pgxpool.ParseConfig(fx.db.URL)
	if err != nil {
		b.Fatal(err)
	}
	cfg.ConnConfig.RuntimeParams["client_encoding"] = "UTF8"
	timer := &sqlTimer{}
	cfg.ConnConfig.Tracer = timer
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		b.Fatal(err)
	}
	defer pool.Close()
	reg := register.New(pool)
	var counts [2]int64
	if err := pool.QueryRow(ctx, "SELECT (SELECT count(*) FROM mark), (SELECT count(*) FROM height)").Scan(&counts[0], &counts[1]); err != nil {
		b.Fatal(err)
	}
	b.Logf("register: %d marks, %d height versions; network: %d marks, %d runs, %d held", counts[0], counts[1], fx.marks, len(fx.runs), len(fx.held))

	var draft, draftSQL, draftFloor, publish, publishSQL, publishFloor time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		timer.reset()
		t0 := time.Now()
		v, err := reg.Adjust(ctx, register.AdjustParams{RunIDs: fx.runs, Hold: register.HoldFixed(fx.held...),
			Method: register.MethodLeastSquares, By: "bench"})
		if err != nil {
			b.Fatal(err)
		}
		draft += time.Since(t0)
		d, n, slow := timer.reset()
		draftSQL += d
		b.Logf("draft: %d results, %d sections, %d statements, %.2f s; the slowest:%s", len(v.Results), len(v.Sections), n, d.Seconds(), slow)
		draftFloor += draftFloorOnce(b, pool, fx, v)
		publishFloor += publishFloorOnce(b, pool, v)
		// The floor's 50,000 versions, rolled back, are dead rows in the
		// height table and its indexes, which the publication's probes of
		// each chain and its unique checks would step over first (about
		// 1.5 s of its insert): a publication never follows one rolled
		// back, so they are vacuumed away, outside the times.
		if _, err := pool.Exec(ctx, "VACUUM height"); err != nil {
			b.Fatal(err)
		}
		timer.reset()
		t0 = time.Now()
		pub, err := reg.Publish(ctx, register.PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "bench", By: "bench",
			AcceptFailedChecks: true, AcceptReason: "a generated network"})
		if err != nil {
			b.Fatal(err)
		}
		publish += time.Since(t0)
		d, n, slow = timer.reset()
		publishSQL += d
		b.Logf("publish: %d versions, %d statements, %.2f s; the slowest:%s", len(pub.Versions), n, d.Seconds(), slow)
		if want := len(v.Results) - len(fx.held); len(pub.Versions) != want {
			b.Fatalf("%d versions published, want %d", len(pub.Versions), want)
		}
	}
	n := float64(b.N)
	b.ReportMetric(0, "ns/op")
	b.ReportMetric(draft.Seconds()/n, "draft-s")
	b.ReportMetric(draftSQL.Seconds()/n, "draft-sql-s")
	b.ReportMetric(draftFloor.Seconds()/n, "draft-floor-s")
	b.ReportMetric(publish.Seconds()/n, "publish-s")
	b.ReportMetric(publishSQL.Seconds()/n, "publish-sql-s")
	b.ReportMetric(publishFloor.Seconds()/n, "publish-floor-s")
}

// draftFloorOnce times the bare statements of a draft of v's runs, in one
// transaction rolled back: the runs with their books, their sections with
// the marks' designations, the latest height of each mark on the datum
// and its latest condition report (each by its key), then the adjustment,
// its runs, results and sections written.
func draftFloorOnce(b *testing.B, pool *pgxpool.Pool, fx *networkFixture, v *register.AdjustmentView) time.Duration {
	b.Helper()
	ctx := context.Background()
	marks := make([]int64, len(v.Results))
	for i, r := range v.Results {
		marks[i] = r.MarkID
	}
	sort.Slice(marks, func(i, j int) bool { return marks[i] < marks[j] })
	t0 := time.Now()
	tx, err := pool.BeginTx(ctx, pgx.TxOptions{IsoLevel: pgx.RepeatableRead})
	if err != nil {
		b.Fatal(err)
	}
	defer tx.Rollback(ctx)
	drain := func(sql string, args ...any) {
		rows, err := tx.Query(ctx, sql, args...)
		if err != nil {
			b.Fatal(err)
		}
		for rows.Next() {
			if _, err := rows.Values(); err != nil {
				b.Fatal(err)
			}
		}
		if err := rows.Err(); err != nil {
			b.Fatal(err)
		}
	}
	drain(`SELECT r.* FROM unnest($1::bigint[]) AS u (id) JOIN run r ON r.id = u.id`, fx.runs)
	drain(`SELECT s.run_id, s.seq, s.from_mark_id, s.to_mark_id, f.designation, t.designation, s.dh_m, s.length_m, s.setups, s.first_line, s.last_line
		FROM unnest($1::bigint[]) AS u (id) JOIN section s ON s.run_id = u.id JOIN mark f ON f.id = s.from_mark_id JOIN mark t ON t.id = s.to_mark_id`, fx.runs)
	drain(`SELECT h.* FROM unnest($1::bigint[]) AS u (mark_id)
		CROSS JOIN LATERAL (SELECT * FROM height x WHERE x.mark_id = u.mark_id AND x.datum_id = $2 ORDER BY x.version DESC LIMIT 1) h`, marks, v.Adjustment.DatumID)
	drain(`SELECT c.* FROM unnest($1::bigint[]) AS u (mark_id)
		CROSS JOIN LATERAL (SELECT * FROM mark_condition mc WHERE mc.mark_id = u.mark_id ORDER BY mc.observed_on DESC, mc.id DESC LIMIT 1) c`, marks)
	var id int64
	if err := tx.QueryRow(ctx, `INSERT INTO adjustment (method, datum_id, parameters, statistics, created_by) VALUES ($1, $2, $3, $4, 'bench') RETURNING id`,
		v.Adjustment.Method, v.Adjustment.DatumID, string(v.Adjustment.Parameters), string(v.Adjustment.Statistics)).Scan(&id); err != nil {
		b.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `INSERT INTO adjustment_run (adjustment_id, run_id) SELECT $1, unnest($2::bigint[])`, id, fx.runs); err != nil {
		b.Fatal(err)
	}
	if _, err := store.AdjustmentResultCopy(ctx, tx, store.AdjustmentResultCopyParams{AdjustmentID: id, Results: v.Results}); err != nil {
		b.Fatal(err)
	}
	if _, err := store.AdjustmentSectionCopy(ctx, tx, store.AdjustmentSectionCopyParams{AdjustmentID: id, Sections: v.Sections}); err != nil {
		b.Fatal(err)
	}
	return time.Since(t0)
}

// publishFloorOnce times the bare statements of v's publication, in one
// transaction rolled back: its marks locked, its event written, and its
// versions inserted in one statement through the height table's triggers
// (hash chain, evidence), returning their ids.
func publishFloorOnce(b *testing.B, pool *pgxpool.Pool, v *register.AdjustmentView) time.Duration {
	b.Helper()
	ctx := context.Background()
	var marks, sup []int64
	var vals, units []string
	var decs []int16
	var all []int64
	for _, r := range v.Results {
		all = append(all, r.MarkID)
		if r.Held {
			continue
		}
		var s int64
		if r.Replaces != nil {
			s = *r.Replaces
		}
		marks, sup, vals, units, decs = append(marks, r.MarkID), append(sup, s), append(vals, *r.Value), append(units, *r.Unit), append(decs, int16(*r.Decimals))
	}
	sort.Slice(all, func(i, j int) bool { return all[i] < all[j] })
	t0 := time.Now()
	tx, err := pool.Begin(ctx)
	if err != nil {
		b.Fatal(err)
	}
	defer tx.Rollback(ctx)
	if _, err := tx.Exec(ctx, `SELECT 1 FROM mark m JOIN unnest($1::bigint[]) AS u (id) ON m.id = u.id ORDER BY m.id FOR UPDATE OF m`, all); err != nil {
		b.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `INSERT INTO adjustment_event (adjustment_id, status, reason, recorded_by) VALUES ($1, 'published', 'bench', 'bench')`, v.Adjustment.ID); err != nil {
		b.Fatal(err)
	}
	rows, err := tx.Query(ctx, `INSERT INTO height (mark_id, datum_id, supersedes, value, unit, decimals, class, source_kind, source, adjustment_id, reason, recorded_by)
		SELECT u.mark_id, $1, nullif(u.supersedes, 0), u.value, u.unit, u.decimals, $2, 'adjustment', $3, $4, 'bench', 'bench'
		FROM unnest($5::bigint[], $6::bigint[], $7::numeric[], $8::text[], $9::smallint[]) AS u (mark_id, supersedes, value, unit, decimals)
		RETURNING id`, v.Adjustment.DatumID, string(v.Results[0].Class), register.AdjustmentSource(v.Adjustment.ID, v.Adjustment.Method, len(v.Runs)),
		v.Adjustment.ID, marks, sup, vals, units, decs)
	if err != nil {
		b.Fatal(err)
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
	if err != nil {
		b.Fatal(err)
	}
	if len(ids) != len(marks) {
		b.Fatalf("floor: %d versions inserted, want %d", len(ids), len(marks))
	}
	return time.Since(t0)
}
