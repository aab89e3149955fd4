package store

import (
	"testing"
	"time"

	"github.com/jackc/pgx/v5/pgtype"
)

// decodeChainRow reads the binary rows as pgx's own codecs write them (the
// reference: pgtype's binary encoders, which follow PostgreSQL's send
// functions), times before and after 2000-01-01 (PostgreSQL's epoch for
// binary timestamps) included, and refuses a value of the wrong length.
func TestDecodeChainRowAsPgx(t *testing.T) {
	m := pgtype.NewMap()
	enc := func(oid uint32, v any) []byte {
		if v == nil {
			return nil
		}
		b, err := m.Encode(oid, pgtype.BinaryFormatCode, v, nil)
		if err != nil {
			t.Fatal(err)
		}
		if b == nil {
			b = []byte{}
		}
		return b
	}
	for _, at := range []time.Time{
		time.Date(2024, 6, 10, 12, 30, 45, 123456000, time.UTC),
		time.Date(1987, 3, 1, 23, 59, 59, 999999000, time.UTC),
		time.Date(1999, 12, 31, 23, 59, 59, 1000, time.UTC),
		time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC),
	} {
		force := at.Add(-time.Hour)
		row := [][]byte{
			enc(pgtype.Int8OID, int64(41)), enc(pgtype.Int8OID, int64(7)), enc(pgtype.Int8OID, int64(2)),
			enc(pgtype.Int4OID, int32(3)), enc(pgtype.Int8OID, int64(40)), enc(pgtype.TextOID, "769.83"), enc(pgtype.TextOID, "usft"),
			enc(pgtype.Int2OID, int16(2)), enc(pgtype.TextOID, ""), enc(pgtype.TextOID, "authority"), enc(pgtype.TextOID, "Tallis County book"),
			nil, enc(pgtype.TextOID, "from the book ±°"), enc(pgtype.TextOID, "tester"),
			enc(pgtype.TextOID, "cairn_recorder"), enc(pgtype.TimestamptzOID, at), enc(pgtype.TimestamptzOID, force),
			enc(pgtype.ByteaOID, []byte{1, 2, 3}),
		}
		var r ChainRow
		if err := decodeChainRow(&r, row, map[int64]string{2: "NAVD88"}); err != nil {
			t.Fatal(err)
		}
		if r.ID != 41 || r.MarkID != 7 || r.DatumCode != "NAVD88" || r.Version != 3 ||
			!r.HasSupersedes || r.Supersedes != 40 || string(r.Value) != "769.83" || string(r.Unit) != "usft" || !r.HasDecimals || r.Decimals != 2 ||
			r.Class == nil || len(r.Class) != 0 || string(r.SourceKind) != "authority" || r.HasAdjustment || string(r.Reason) != "from the book ±°" ||
			string(r.RecordedRole) != "cairn_recorder" || !r.RecordedAt.Equal(at) || !r.HasInForce || !r.InForceGiven.Equal(force) || string(r.Hash) != "\x01\x02\x03" {
			t.Errorf("decoded %+v", r)
		}
		row[16], row[14], row[4] = nil, nil, nil
		if err := decodeChainRow(&r, row, map[int64]string{2: "NAVD88"}); err != nil || r.HasInForce || r.RecordedRole != nil || r.HasSupersedes {
			t.Errorf("nulls: %v, %+v", err, r)
		}
	}
	bad := make([][]byte, len(chainColumns))
	bad[0] = []byte{1, 2, 3}
	if err := decodeChainRow(&ChainRow{}, bad, nil); err == nil {
		t.Error("a bigint of 3 bytes decoded")
	}
}
