package store

import (
	"context"
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// ChainRow is one height version as the audit of the chains reads it: the
// fields of its canonical text as the database sends them (binary
// format), without a string, a pointer or a time zone per field. Its
// slices are the connection's buffer: valid until the next row only.
type ChainRow struct {
	ID, MarkID, DatumID int64
	Version             int
	Supersedes          int64
	HasSupersedes       bool
	Designation         []byte // nil with NoMark
	NoMark              bool   // its mark_id names no row of mark
	DatumCode           string
	Value, Unit         []byte // nil for a withdrawal
	Decimals            int
	HasDecimals         bool
	Class, SourceKind   []byte
	Source              []byte
	AdjustmentID        int64
	HasAdjustment       bool
	Reason, RecordedBy  []byte
	RecordedRole        []byte // nil before schema v12
	RecordedAt          time.Time
	InForceGiven        time.Time
	HasInForce          bool
	Hash                []byte
}

// chainColumns are ChainRow's columns, in the order HeightChainRows
// decodes them, with the type each must have. The designation is not
// among them: it is read once per mark (chainMarks), not once per version.
var chainColumns = []struct {
	name string
	oid  uint32
}{
	{"id", pgtype.Int8OID}, {"mark_id", pgtype.Int8OID}, {"datum_id", pgtype.Int8OID},
	{"version", pgtype.Int4OID}, {"supersedes", pgtype.Int8OID}, {"value", pgtype.TextOID}, {"unit", pgtype.TextOID},
	{"decimals", pgtype.Int2OID}, {"class", pgtype.TextOID}, {"source_kind", pgtype.TextOID}, {"source", pgtype.TextOID},
	{"adjustment_id", pgtype.Int8OID}, {"reason", pgtype.TextOID}, {"recorded_by", pgtype.TextOID},
	{"recorded_role", pgtype.TextOID}, {"recorded_at", pgtype.TimestamptzOID}, {"in_force_from", pgtype.TimestamptzOID},
	{"hash", pgtype.ByteaOID},
}

// ChainChunk is how many mark ids HeightChainRows reads at a time: the
// designations of a chunk's marks are held while its versions stream
// (since a transaction, the marks with a version written since, in one
// chunk).
var ChainChunk = int64(10000)

// HeightChainRows calls fn with every version of the marks with ids from
// lo to hi (inclusive), chain by chain (mark, datum) in version order, as
// HeightChainEach does, but decoded by hand from the binary rows: the
// order is the unique index on (mark_id, datum_id, version), so the server
// streams it without a sort. Neither the designation nor the datum's code
// is sent with every version: the marks' designations are read first, a
// chunk of ChainChunk mark ids at a time (in id order, the primary key's),
// and matched to the versions in Go as both come in mark order, and the
// datums' codes come from a map of the few datums read first. A version
// whose mark is not in the mark table (which the foreign key forbids) is
// still given to fn, with NoMark set and no designation, so that the
// audit reports it rather than skipping it. r is reused from call to
// call, and its slices are valid during the call only.
//
// With after not nil, only the chains with a version written by a
// transaction after that one, each whole (an incremental audit's).
func HeightChainRows(ctx context.Context, db DBTX, lo, hi int64, after *uint64, fn func(r *ChainRow) error) error {
	datums, err := datumCodes(ctx, db)
	if err != nil {
		return err
	}
	var (
		marks []chainMark
		names []byte
		r     ChainRow
	)
	// Since a transaction, one chunk: the marks read are only those with a
	// version written since (as many as were written, at most), and each
	// chunk would look for them again in the index on created_xid.
	step := ChainChunk
	if after != nil {
		step = max(hi-lo+1, 1)
	}
	for from := lo; from <= hi; from += step {
		to := min(from+step-1, hi)
		cond, args := "", []any{pgx.QueryResultFormats{pgx.BinaryFormatCode}, from, to}
		if after != nil {
			// The chains touched since: the index on created_xid finds their
			// versions, and each chain is then read whole by the unique index.
			cond = ` AND (h.mark_id, h.datum_id) IN (SELECT DISTINCT x.mark_id, x.datum_id FROM height x
				WHERE x.created_xid > $3::text::xid8 AND x.mark_id BETWEEN $1 AND $2)`
			args = append(args, strconv.FormatUint(*after, 10))
		}
		if marks, names, err = chainMarks(ctx, db, args, after != nil, marks[:0], names[:0]); err != nil {
			return err
		}
		rows, err := db.Query(ctx, chainVersions+cond+chainOrder, args...)
		if err != nil {
			return translate(err)
		}
		if err := chainStream(rows, datums, marks, names, &r, fn); err != nil {
			rows.Close()
			return err
		}
	}
	return nil
}

// chainVersions and chainOrder are HeightChainRows' query of one chunk's
// versions, a condition between them for the chains since a transaction.
const (
	chainVersions = `SELECT h.id, h.mark_id, h.datum_id, h.version, h.supersedes,
		h.value::text, h.unit, h.decimals, h.class, h.source_kind, h.source, h.adjustment_id,
		h.reason, h.recorded_by, h.recorded_role, h.recorded_at, h.in_force_from, h.hash
		FROM height h
		WHERE h.mark_id BETWEEN $1 AND $2`
	chainOrder = ` ORDER BY h.mark_id, h.datum_id, h.version`
)

// ChainSession prepares transaction tx, which reads the whole chains of
// a range of marks (HeightChainRows without after), for the rest of it:
// the versions streamed by the unique index on (mark_id, datum_id,
// version), never a sort, and no parallel workers (the audit divides the
// marks among transactions itself). On an analyzed register, a chunk
// that is a large part of the table is otherwise planned as a sequential
// scan and a sort of the chunk (spilling to disk at the default
// work_mem), and the join's or the sort's parallel workers add processes
// to the two cores (docs/performance.md, "audit verify at the floor").
// Not for the chains since a transaction: their versions are found by
// the index on created_xid, and in order only by a sort of the few.
func ChainSession(ctx context.Context, tx pgx.Tx) error {
	for _, q := range []string{"SET LOCAL enable_sort = off", "SET LOCAL max_parallel_workers_per_gather = 0"} {
		if _, err := tx.Exec(ctx, q); err != nil {
			return fmt.Errorf("prepare the audit of the chains: %w", translate(err))
		}
	}
	return nil
}

// chainMark is a mark's id and where its designation is in chainMarks'
// names.
type chainMark struct {
	id         int64
	start, end int
}

// chainMarks reads the designations of the marks of one chunk of
// HeightChainRows (args: its query's, the chunk's first and last mark id
// and, since, the transaction after which), in id order, into marks and
// names (reused).
func chainMarks(ctx context.Context, db DBTX, args []any, since bool, marks []chainMark, names []byte) ([]chainMark, []byte, error) {
	q := "SELECT m.id, m.designation FROM mark m WHERE m.id BETWEEN $1 AND $2 ORDER BY m.id"
	if since {
		q = `SELECT m.id, m.designation FROM mark m WHERE m.id IN (SELECT DISTINCT x.mark_id FROM height x
			WHERE x.created_xid > $3::text::xid8 AND x.mark_id BETWEEN $1 AND $2) ORDER BY m.id`
	}
	rows, err := db.Query(ctx, q, args...)
	if err != nil {
		return nil, nil, translate(err)
	}
	defer rows.Close()
	fds := rows.FieldDescriptions()
	if len(fds) != 2 || fds[0].DataTypeOID != pgtype.Int8OID || fds[1].DataTypeOID != pgtype.TextOID || fds[0].Format != pgx.BinaryFormatCode || fds[1].Format != pgx.BinaryFormatCode {
		return nil, nil, fmt.Errorf("read the chains' marks: columns %v, want a bigint and a text in binary", fds)
	}
	for rows.Next() {
		v := rows.RawValues()
		if len(v[0]) != 8 || v[1] == nil {
			return nil, nil, fmt.Errorf("read the chains' marks: a mark's id of %d bytes, or no designation", len(v[0]))
		}
		id := int64(binary.BigEndian.Uint64(v[0]))
		if n := len(marks); n > 0 && marks[n-1].id >= id {
			return nil, nil, fmt.Errorf("read the chains' marks: mark %d after mark %d", id, marks[n-1].id)
		}
		marks = append(marks, chainMark{id: id, start: len(names), end: len(names) + len(v[1])})
		names = append(names, v[1]...)
	}
	return marks, names, translate(rows.Err())
}

// chainStream decodes the versions of one chunk and calls fn with each,
// its designation matched from marks (both in mark id order).
func chainStream(rows pgx.Rows, datums map[int64]string, marks []chainMark, names []byte, r *ChainRow, fn func(r *ChainRow) error) error {
	defer rows.Close()
	fds := rows.FieldDescriptions()
	if len(fds) != len(chainColumns) {
		return fmt.Errorf("read the chains: %d columns, want %d", len(fds), len(chainColumns))
	}
	for i, c := range chainColumns {
		if fds[i].DataTypeOID != c.oid || fds[i].Format != pgx.BinaryFormatCode {
			return fmt.Errorf("read the chains: column %s is of type %d in format %d, want type %d in binary", c.name, fds[i].DataTypeOID, fds[i].Format, c.oid)
		}
	}
	k := 0
	for rows.Next() {
		v := rows.RawValues()
		if err := decodeChainRow(r, v, datums); err != nil {
			return fmt.Errorf("read the chains: %w", err)
		}
		for k < len(marks) && marks[k].id < r.MarkID {
			k++
		}
		r.NoMark = k == len(marks) || marks[k].id != r.MarkID
		r.Designation = nil
		if !r.NoMark {
			r.Designation = names[marks[k].start:marks[k].end:marks[k].end]
		}
		if err := fn(r); err != nil {
			return err
		}
	}
	return translate(rows.Err())
}

// datumCodes returns every datum's code by id.
func datumCodes(ctx context.Context, db DBTX) (map[int64]string, error) {
	rows, err := db.Query(ctx, "SELECT id, code FROM datum")
	if err != nil {
		return nil, translate(err)
	}
	defer rows.Close()
	out := map[int64]string{}
	for rows.Next() {
		var id int64
		var code string
		if err := rows.Scan(&id, &code); err != nil {
			return nil, translate(err)
		}
		out[id] = code
	}
	return out, translate(rows.Err())
}

// pgEpochUnix is the origin of PostgreSQL's binary timestamps,
// 2000-01-01 00:00:00 UTC, in Unix seconds.
const pgEpochUnix = 946684800

// decodeChainRow decodes one binary row of HeightChainRows into r.
func decodeChainRow(r *ChainRow, v [][]byte, datums map[int64]string) error {
	var err error
	int8At := func(i int) (int64, bool) {
		if v[i] == nil {
			return 0, false
		}
		if len(v[i]) != 8 {
			err = fmt.Errorf("column %s: %d bytes for a bigint", chainColumns[i].name, len(v[i]))
			return 0, false
		}
		return int64(binary.BigEndian.Uint64(v[i])), true
	}
	timeAt := func(i int) (time.Time, bool) {
		if v[i] == nil {
			return time.Time{}, false
		}
		if len(v[i]) != 8 {
			err = fmt.Errorf("column %s: %d bytes for a timestamptz", chainColumns[i].name, len(v[i]))
			return time.Time{}, false
		}
		us := int64(binary.BigEndian.Uint64(v[i]))
		if us == math.MaxInt64 || us == math.MinInt64 {
			err = fmt.Errorf("column %s: an infinite time", chainColumns[i].name)
			return time.Time{}, false
		}
		return time.Unix(pgEpochUnix+us/1e6, (us%1e6)*1e3).UTC(), true
	}
	need := func(i int) []byte {
		if v[i] == nil {
			err = fmt.Errorf("column %s: null", chainColumns[i].name)
		}
		return v[i]
	}
	var ok bool
	if r.ID, ok = int8At(0); !ok && err == nil {
		err = fmt.Errorf("column id: null")
	}
	r.MarkID, _ = int8At(1)
	r.DatumID, _ = int8At(2)
	if len(v[3]) != 4 {
		return fmt.Errorf("column version: %d bytes for an integer", len(v[3]))
	}
	r.Version = int(int32(binary.BigEndian.Uint32(v[3])))
	r.Supersedes, r.HasSupersedes = int8At(4)
	r.Value, r.Unit = v[5], v[6]
	r.HasDecimals = v[7] != nil
	if r.HasDecimals {
		if len(v[7]) != 2 {
			return fmt.Errorf("column decimals: %d bytes for a smallint", len(v[7]))
		}
		r.Decimals = int(int16(binary.BigEndian.Uint16(v[7])))
	}
	r.Class, r.SourceKind, r.Source = need(8), need(9), need(10)
	r.AdjustmentID, r.HasAdjustment = int8At(11)
	r.Reason, r.RecordedBy = need(12), need(13)
	r.RecordedRole = v[14]
	r.RecordedAt, _ = timeAt(15)
	r.InForceGiven, r.HasInForce = timeAt(16)
	r.Hash = need(17)
	if err != nil {
		return fmt.Errorf("height version %d: %w", r.ID, err)
	}
	code, ok := datums[r.DatumID]
	if !ok {
		return fmt.Errorf("height version %d: datum %d is not in the datum table", r.ID, r.DatumID)
	}
	r.DatumCode = code
	return nil
}
