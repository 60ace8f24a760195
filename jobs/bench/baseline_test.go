package bench

import (
	"context"
	"database/sql"
	"math"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestBaselineSumsTheIntegral holds the baseline query to a closed form, in
// both plans: a drive held at a constant temperature T for n hourly
// intervals has used n / (5000 × 2^((105 − T)/10)) of a 5000 h / 105 °C
// part's life. Source: capacitor makers' application notes, the
// 10-degree rule (DESIGN.md section 3), summed by the Palmgren–Miner rule.
// A query that skipped the temperature, as the count(*) wrapper once let
// PostgreSQL do, fails it.
func TestBaselineSumsTheIntegral(t *testing.T) {
	ctx := context.Background()
	// A fresh schema, dropped at the end; skips or fails as the other
	// PostgreSQL tests do when the server is out of reach.
	db, err := sql.Open("pgx", storetest.URL(t, store.Postgres))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	for _, q := range []string{
		`CREATE TABLE readings (drive_id bigint, at timestamptz, internal_air_c double precision, PRIMARY KEY (drive_id, at))`,
		// Drive 1 at 95 °C for 10 intervals, drive 2 at 115 °C for 4,
		// drive 3 at 105 °C for 1 interval of 3 hours.
		`INSERT INTO readings SELECT 1, timestamptz '2026-01-01 00:00Z' + h * interval '1 hour', 95 FROM generate_series(0, 10) h`,
		`INSERT INTO readings SELECT 2, timestamptz '2026-01-01 00:00Z' + h * interval '1 hour', 115 FROM generate_series(0, 4) h`,
		`INSERT INTO readings VALUES (3, '2026-01-01 00:00Z', 105), (3, '2026-01-01 03:00Z', 105)`,
	} {
		if _, err := db.ExecContext(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	want := map[int64]float64{1: 10 / (5000 * 2.0), 2: 4 / (5000 * 0.5), 3: 3.0 / 5000}
	for _, sorted := range []bool{false, true} {
		got, err := baselineSums(ctx, db, sorted)
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != len(want) {
			t.Fatalf("sorted %v: %d drives, want %d", sorted, len(got), len(want))
		}
		for id, w := range want {
			if math.Abs(got[id]-w) > 1e-12*w {
				t.Errorf("sorted %v: drive %d summed %g, want %g", sorted, id, got[id], w)
			}
		}
		if err := runBaseline(ctx, db, len(want), sorted); err != nil {
			t.Error(err)
		}
	}
}
