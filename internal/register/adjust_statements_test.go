package register_test

import (
	"context"
	"sync/atomic"
	"testing"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"

	"cairn/internal/pgtest"
	. "cairn/internal/register"
	"cairn/internal/registertest"
)

// statements counts the statements sent through a pool.
type statements struct{ n atomic.Int64 }

func (s *statements) TraceQueryStart(ctx context.Context, _ *pgx.Conn, _ pgx.TraceQueryStartData) context.Context {
	s.n.Add(1)
	return ctx
}
func (s *statements) TraceQueryEnd(context.Context, *pgx.Conn, pgx.TraceQueryEndData) {}

// An adjustment reads its runs, their books and the marks named a kind at
// a time: the statements a draft takes do not grow with the runs chosen or
// the marks named (issue 15: 2,947 statements for 2,947 runs, one a name
// of --marks).
func TestAdjustStatementsPerKindNotPerItem(t *testing.T) {
	t.Parallel()
	count := func(copies int, marks []string) int64 {
		t.Helper()
		db := pgtest.New(t)
		b := registertest.On(t, db)
		b.WorkedCircuit(t, registertest.WorkedCircuitOpts{Copies: copies})
		cfg, err := pgxpool.ParseConfig(db.URL)
		if err != nil {
			t.Fatal(err)
		}
		var st statements
		cfg.ConnConfig.Tracer = &st
		pool, err := pgxpool.NewWithConfig(b.Ctx, cfg)
		if err != nil {
			t.Fatal(err)
		}
		defer pool.Close()
		reg := New(pool)
		p := b.AdjustParams(registertest.AdjustmentOpts{Runs: []int64{}, Method: MethodLeastSquares, DryRun: true})
		p.Marks = marks
		if err := pool.Ping(b.Ctx); err != nil { // the connection's own set-up, before counting
			t.Fatal(err)
		}
		st.n.Store(0)
		v, err := reg.Adjust(b.Ctx, p)
		if err != nil {
			t.Fatal(err)
		}
		if len(v.Runs) != copies {
			t.Fatalf("%d runs adjusted, want %d", len(v.Runs), copies)
		}
		return st.n.Load()
	}
	two := count(2, []string{"BM2", "BM3"})
	if six := count(6, []string{"BM2", "BM3"}); six != two {
		t.Errorf("2 runs: %d statements; 6 runs: %d", two, six)
	}
	if five := count(2, []string{"BM2", "BM3", "BM4", "BM5", "BM6"}); five != two {
		t.Errorf("2 marks named: %d statements; 5 marks: %d", two, five)
	}
}
