package store

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// ServerClock returns the database server's clock now
// (clock_timestamp(), not the transaction's start).
func ServerClock(ctx context.Context, db DBTX) (time.Time, error) {
	var t time.Time
	if err := db.QueryRow(ctx, "SELECT clock_timestamp()").Scan(&t); err != nil {
		return time.Time{}, fmt.Errorf("read the database server's clock: %w", translate(err))
	}
	return t, nil
}

// Commit commits tx. The register's deferred checks run then (the commit
// of a writing transaction is stamped in register_commit, and refused
// with ErrClock when the server's clock is behind the register's latest
// commit), so its errors are translated like any statement's.
func Commit(ctx context.Context, tx pgx.Tx) error {
	return translate(tx.Commit(ctx))
}

// CommitRow is a row of register_commit: one writing transaction, when it
// committed and the login role that wrote it.
type CommitRow struct {
	CommittedAt time.Time
	Login       string
}

// CommitLatest returns the register's latest commit; ErrNotFound when
// nothing was written since schema v12 (the genesis entry of schema v13,
// seq 0, which stands for the rows written before, is no commit).
func CommitLatest(ctx context.Context, db DBTX) (CommitRow, error) {
	var c CommitRow
	err := db.QueryRow(ctx, "SELECT committed_at, login FROM register_commit WHERE seq > 0 ORDER BY committed_at DESC LIMIT 1").Scan(&c.CommittedAt, &c.Login)
	return c, translate(err)
}

// TxID returns the register's number of transaction tx (cairn_xact(),
// migrations/00014: the server's id, assigned if it has none, plus the
// register's base in this cluster), the number its rows and its commit
// carry.
func TxID(ctx context.Context, tx pgx.Tx) (uint64, error) {
	var id uint64
	if err := tx.QueryRow(ctx, "SELECT cairn_xact()::text::bigint").Scan(&id); err != nil {
		return 0, fmt.Errorf("read the transaction's id: %w", translate(err))
	}
	return id, nil
}

// CommitTime returns when transaction xid committed (its register_commit
// row); ErrNotFound when it has none.
func CommitTime(ctx context.Context, db DBTX, xid uint64) (time.Time, error) {
	var t time.Time
	err := db.QueryRow(ctx, "SELECT committed_at FROM register_commit WHERE xid = $1::bigint::text::xid8", int64(xid)).Scan(&t)
	if err != nil {
		return time.Time{}, fmt.Errorf("read the commit of transaction %d: %w", xid, translate(err))
	}
	return t, nil
}

// CommitHeadRow is the head of the register's evidence chain: its last
// commit's seq, hash and time.
type CommitHeadRow struct {
	Seq         int64
	Hash        []byte
	CommittedAt time.Time
}

// CommitHead returns the last entry of the evidence chain (the genesis
// entry, seq 0, when nothing was written since); ErrNotFound when the
// chain is empty.
func CommitHead(ctx context.Context, db DBTX) (CommitHeadRow, error) {
	var c CommitHeadRow
	err := db.QueryRow(ctx, "SELECT seq, hash, committed_at FROM public.register_commit ORDER BY seq DESC LIMIT 1").Scan(&c.Seq, &c.Hash, &c.CommittedAt)
	return c, translate(err)
}
