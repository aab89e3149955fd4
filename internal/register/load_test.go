package register_test

import (
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5/pgxpool"

	. "cairn/internal/register"
	"cairn/internal/registertest"
)

// loadDuration is how long the load test runs: CAIRN_LOAD_SECONDS, else 5
// seconds (docs/reliability.md records a full run of 60).
func loadDuration(t *testing.T) time.Duration {
	t.Helper()
	s := os.Getenv("CAIRN_LOAD_SECONDS")
	if s == "" {
		return 5 * time.Second
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < 1 || n > 600 {
		t.Fatalf("CAIRN_LOAD_SECONDS=%q: want whole seconds from 1 to 600", s)
	}
	return time.Duration(n) * time.Second
}

// Sixteen workers for a bounded time mix look-ups, recordings, condition
// reports, outside heights and publications of adjustments over two
// circuits of six marks each: BM1 to BM6 (the worked circuit) and OB1 to
// OB6 (the same book with its marks renamed), each held at its first mark.
// Outside heights land mostly on the BM circuit, so its publications
// mostly conflict; publications of the OB circuit, drafted and published
// at once, mostly succeed, except when another publisher or the outside
// heights that still reach the OB marks get there first. Afterwards no
// version is lost or duplicated (the versions in the register are exactly
// those the workers were told they wrote), every chain verifies, and every
// failure was a clean conflict. Throughput is reported, not asserted.
func TestLoadSixteenWorkers(t *testing.T) {
	t.Parallel()
	b, firstRun := setupWorked(t)
	ctx := context.Background()
	cfg, err := pgxpool.ParseConfig(b.DB.URL)
	if err != nil {
		t.Fatal(err)
	}
	const workers = 16
	cfg.MaxConns = workers + 2
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	reg := New(pool)
	book := registertest.WorkedBook(t, 0)
	// The quiet circuits: the same book over marks of their own.
	quiet := []string{"OA", "OB", "OC", "OD"}
	circuits := append([]string{"BM"}, quiet...)
	books := map[string][]byte{"BM": book}
	firstRuns := map[string]int64{"BM": firstRun}
	for _, c := range quiet {
		books[c] = []byte(strings.ReplaceAll(string(book), "BM", c))
		for i := 1; i <= 6; i++ {
			b.Mark(t, registertest.MarkOpts{Designation: fmt.Sprintf("%s%d", c, i), NoPosition: true})
		}
		outside(t, b, c+"1", "728.730", "Outside control, sheet "+c+" (invented citation)")
		firstRuns[c] = b.Run(t, registertest.RunOpts{Path: "orrin-bay-" + c + ".csv", Book: books[c]}).Run.ID
	}

	type tally struct {
		ops, conflicts map[string]int
		tried          map[string]int // publications tried, by circuit
		published      map[string]int // publications that wrote, by circuit
		versions       int            // height versions the worker was told it wrote
		perMark        map[string]int
		unexpected     []string
	}
	tallies := make([]*tally, workers)
	deadline := time.Now().Add(loadDuration(t))
	var wg sync.WaitGroup
	for w := range workers {
		tl := &tally{ops: map[string]int{}, conflicts: map[string]int{}, perMark: map[string]int{}, tried: map[string]int{}, published: map[string]int{}}
		tallies[w] = tl
		wg.Add(1)
		go func() {
			defer wg.Done()
			rng := rand.New(rand.NewPCG(uint64(w), 7))
			runs := map[string][]int64{}
			for c, id := range firstRuns {
				runs[c] = []int64{id}
			}
			for i := 0; time.Now().Before(deadline); i++ {
				// Look-ups, reports and recordings go to any circuit.
				circuit := circuits[rng.IntN(len(circuits))]
				mark := fmt.Sprintf("%s%d", circuit, 1+rng.IntN(6))
				var kind string
				var err error
				switch p := rng.IntN(100); {
				case p < 40:
					kind = "look-up"
					switch i % 3 {
					case 0:
						_, err = reg.HeightShow(ctx, HeightShowParams{Designation: mark})
					case 1:
						_, err = reg.History(ctx, mark, "NAVD88")
					default:
						_, err = reg.MarkShow(ctx, mark)
					}
				case p < 55:
					kind = "condition"
					today := time.Now().UTC().Truncate(24 * time.Hour)
					_, err = reg.MarkCondition(ctx, MarkConditionParams{Designation: mark, Condition: "good",
						Note: fmt.Sprintf("worker %d visit %d", w, i), ObservedOn: today, Today: today, RecordedBy: "load"})
				case p < 70:
					kind = "recording"
					var rec *Recorded
					// Each recording is other observations (a side shot
					// of its own): the same observations are recorded once.
					var own []byte
					own, err = registertest.SideShotOf(append([]byte(fmt.Sprintf("# load worker %d book %d\n", w, i)), books[circuit]...),
						fmt.Sprintf("worker %d book %d", w, i))
					if err != nil {
						t.Error(err)
						return
					}
					rec, err = reg.Record(ctx, RecordParams{Path: "worked-circuit.csv", By: "load", Book: own})
					if err == nil {
						runs[circuit] = append(runs[circuit], rec.Run.ID)
					}
				case p < 90:
					kind = "outside height"
					// Nineteen in twenty on the BM circuit; the held marks
					// keep their one version.
					circuit = "BM"
					if rng.IntN(20) == 0 {
						circuit = quiet[rng.IntN(len(quiet))]
					}
					mark = fmt.Sprintf("%s%d", circuit, 2+rng.IntN(5))
					_, err = reg.HeightSet(ctx, HeightSetParams{Designation: mark, Datum: "NAVD88",
						Value: fmt.Sprintf("%d.%03d", 700+rng.IntN(200), rng.IntN(1000)), Unit: "m",
						Source: "Load test sheet (invented citation)", Reason: fmt.Sprintf("worker %d, %d", w, i), RecordedBy: "load",
						InForceFrom: ptrTime(time.Now())})
					if err == nil {
						tl.versions++
						tl.perMark[mark]++
					}
				default:
					kind = "publication"
					// Three in four on a quiet circuit.
					circuit = quiet[rng.IntN(len(quiet))]
					if rng.IntN(4) == 0 {
						circuit = "BM"
					}
					tl.tried[circuit]++
					rs := runs[circuit]
					var v *AdjustmentView
					v, err = reg.Adjust(ctx, b.AdjustParams(registertest.AdjustmentOpts{Runs: []int64{rs[rng.IntN(len(rs))]}, Hold: []string{circuit + "1"}, By: "load"}))
					if err == nil {
						var pub *Published
						pub, err = reg.Publish(ctx, PublishParams{AdjustmentID: v.Adjustment.ID, Reason: "load", By: "load"})
						if err == nil {
							tl.published[circuit]++
							tl.versions += len(pub.Versions)
							for _, h := range pub.Versions {
								tl.perMark[h.Designation]++
							}
						}
					}
				}
				tl.ops[kind]++
				var ce *ConflictError
				switch {
				case err == nil:
				case errors.As(err, &ce) && strings.Contains(err.Error(), "the register changed meanwhile, nothing was written"):
					tl.conflicts[kind]++
				default:
					tl.unexpected = append(tl.unexpected, kind+": "+err.Error())
				}
			}
		}()
	}
	start := time.Now()
	wg.Wait()
	elapsed := time.Since(start)

	ops, conflicts, tried, published := map[string]int{}, map[string]int{}, map[string]int{}, map[string]int{}
	perMark := map[string]int{}
	for _, c := range circuits {
		perMark[c+"1"] = 1 // the held marks' outside heights from setup
	}
	versions, total := len(circuits), 0
	for _, tl := range tallies {
		for _, u := range tl.unexpected {
			t.Errorf("not a clean conflict: %s", u)
		}
		for k, n := range tl.ops {
			ops[k] += n
			total += n
		}
		for k, n := range tl.conflicts {
			conflicts[k] += n
		}
		for k, n := range tl.published {
			published[k] += n
		}
		for k, n := range tl.tried {
			tried[k] += n
		}
		for k, n := range tl.perMark {
			perMark[k] += n
		}
		versions += tl.versions
	}
	for _, k := range []string{"look-up", "condition", "recording", "outside height", "publication"} {
		t.Logf("%-15s %6d operations, %4d conflicts", k, ops[k], conflicts[k])
	}
	var quietTried, quietWrote int
	for _, c := range quiet {
		quietTried, quietWrote = quietTried+tried[c], quietWrote+published[c]
	}
	t.Logf("publications that wrote: %d of %d on the quiet circuits, %d of %d on the BM circuit",
		quietWrote, quietTried, published["BM"], tried["BM"])
	t.Logf("%d workers, %.1f s: %d operations, %.0f per second; %d height versions written", workers, elapsed.Seconds(),
		total, float64(total)/elapsed.Seconds(), versions)
	if ops["publication"] == 0 || ops["recording"] == 0 || ops["condition"] == 0 || ops["outside height"] == 0 {
		t.Fatalf("the mix did not happen: %v", ops)
	}

	// No version lost, none duplicated: per mark, the register holds
	// versions 1..n, exactly as many as were reported written.
	rows, err := b.DB.Pool.Query(ctx, `SELECT m.designation, count(*), count(DISTINCT h.version), max(h.version)
		FROM height h JOIN mark m ON m.id = h.mark_id GROUP BY m.designation`)
	if err != nil {
		t.Fatal(err)
	}
	inRegister := 0
	for rows.Next() {
		var des string
		var n, distinct, top int
		if err := rows.Scan(&des, &n, &distinct, &top); err != nil {
			t.Fatal(err)
		}
		inRegister += n
		if n != perMark[des] || distinct != n || top != n {
			t.Errorf("%s: %d versions (%d distinct, highest %d), %d reported written", des, n, distinct, top, perMark[des])
		}
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	if inRegister != versions {
		t.Errorf("%d versions in the register, %d reported written", inRegister, versions)
	}
	var runsIn int
	if err := b.DB.Pool.QueryRow(ctx, "SELECT count(*) FROM run").Scan(&runsIn); err != nil {
		t.Fatal(err)
	}
	if want := len(circuits) + ops["recording"] - conflicts["recording"]; runsIn != want {
		t.Errorf("%d runs in the register, %d recorded", runsIn, want)
	}
	rep, err := b.Reg.AuditVerify(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Breaks) > 0 || rep.Versions != versions {
		t.Fatalf("audit: %d breaks, %d versions: %+v", len(rep.Breaks), rep.Versions, rep.Breaks)
	}
}

func ptrTime(t time.Time) *time.Time { return &t }
