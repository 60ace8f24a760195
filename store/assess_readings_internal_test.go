package store

import (
	"math"
	"testing"
	"time"

	"github.com/jackc/pgx/v5/pgtype"
)

// TestDecodeReadingRow holds the hand decoder of the assessment scan to
// pgx's own binary encoding and decoding (the reference): values encoded by
// pgtype.Map come back equal from decodeReadingRow and from pgtype's scan.
func TestDecodeReadingRow(t *testing.T) {
	m := pgtype.NewMap()
	enc := func(oid uint32, v any) []byte {
		t.Helper()
		if v == nil {
			return nil
		}
		b, err := m.Encode(oid, pgtype.BinaryFormatCode, v, nil)
		if err != nil {
			t.Fatalf("encode %v: %v", v, err)
		}
		return b
	}
	times := []time.Time{
		time.Date(2026, 11, 30, 23, 59, 59, 123456000, time.UTC),
		time.Date(1999, 12, 31, 23, 0, 0, 0, time.UTC), // before PostgreSQL's epoch
		time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC),
	}
	values := []any{41.5, nil, -12.25, 0.0, math.MaxFloat64, nil, 3e-300, -0.0, 812.0, 1.0 / 3}
	for _, at := range times {
		raw := [][]byte{enc(pgtype.Int8OID, int64(77)), enc(pgtype.Int8OID, int64(-3)), enc(pgtype.TimestamptzOID, at)}
		for _, v := range values {
			raw = append(raw, enc(pgtype.Float8OID, v))
		}
		got, err := decodeReadingRow(raw)
		if err != nil {
			t.Fatalf("decode: %v", err)
		}
		var wantAt time.Time
		if err := m.Scan(pgtype.TimestamptzOID, pgtype.BinaryFormatCode, raw[2], &wantAt); err != nil {
			t.Fatal(err)
		}
		if got.drive != 77 || got.position != -3 || got.atMicro != wantAt.UnixMicro() || !wantAt.Equal(at) {
			t.Errorf("drive %d position %d at %d; want 77, -3, %d", got.drive, got.position, got.atMicro, wantAt.UnixMicro())
		}
		for i, b := range raw[3:] {
			var want pgtype.Float8
			if err := m.Scan(pgtype.Float8OID, pgtype.BinaryFormatCode, b, &want); err != nil {
				t.Fatal(err)
			}
			g := got.values[i]
			switch {
			case !want.Valid && !math.IsNaN(g):
				t.Errorf("value %d: %v, want NaN for NULL", i, g)
			case want.Valid && math.Float64bits(g) != math.Float64bits(want.Float64):
				t.Errorf("value %d: %v, want %v", i, g, want.Float64)
			}
		}
	}

	bad := []struct {
		name string
		raw  [][]byte
	}{
		{"too few values", make([][]byte, 12)},
		{"null drive", append([][]byte{nil, enc(pgtype.Int8OID, int64(1)), enc(pgtype.TimestamptzOID, times[0])}, make([][]byte, 10)...)},
		{"null time", append([][]byte{enc(pgtype.Int8OID, int64(1)), nil, nil}, make([][]byte, 10)...)},
		{"short value", append([][]byte{enc(pgtype.Int8OID, int64(1)), nil, enc(pgtype.TimestamptzOID, times[0]), {1, 2}}, make([][]byte, 9)...)},
	}
	for _, c := range bad {
		if _, err := decodeReadingRow(c.raw); err == nil {
			t.Errorf("%s: decoded without an error", c.name)
		}
	}
}
