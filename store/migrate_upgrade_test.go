package store_test

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
	"time"

	"github.com/pressly/goose/v3"

	"kelvard/migrations"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestUpgradeFromJSONLedgers: a store made by a release that kept the life
// ledgers (and, on PostgreSQL, the report) as JSON is brought to the
// binary columns by migration 00011. Ledgers in the old form are dropped,
// so the next assessment recomputes those drives in full; binary ledgers
// stay; the report still reads as the same JSON.
func TestUpgradeFromJSONLedgers(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		// forEachStore's store is migrated; this test needs one that is
		// not, on the same kind of database.
		d := s.Dialect()
		old, err := store.Open(ctx, storetest.URL(t, d), store.Options{})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { old.Close() })
		dialect, fsys := goose.DialectPostgres, migrations.Postgres()
		if d == store.SQLite {
			dialect, fsys = goose.DialectSQLite3, migrations.SQLite()
		}
		p, err := goose.NewProvider(dialect, old.SQL(), fsys)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := p.UpTo(ctx, 10); err != nil {
			t.Fatal(err)
		}
		jsonDrive := storetest.Build(t, old, "json").Drive
		binDrive := storetest.Build(t, old, "bin").Drive
		exec := func(q string, args ...any) {
			t.Helper()
			if _, err := old.SQL().ExecContext(ctx, q, args...); err != nil {
				t.Fatalf("%s: %v", q, err)
			}
		}
		now := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
		const ledgerJSON, reportJSON = `{"damage": 0.25}`, `{"at": 1772323200}`
		if d == store.Postgres {
			// The columns as the earlier 00003 made them.
			exec(`ALTER TABLE drive_state ALTER COLUMN capacitor_state TYPE jsonb USING '{}'::jsonb,
				ALTER COLUMN fan_state TYPE jsonb USING '{}'::jsonb`)
			exec(`ALTER TABLE assessments ALTER COLUMN report TYPE jsonb USING '{}'::jsonb`)
			exec(`INSERT INTO drive_state (drive_id, capacitor_state, fan_state, params_hash, updated_at) VALUES ($1, $2, $2, 'h', $3)`,
				jsonDrive.ID, ledgerJSON, now)
			exec(`INSERT INTO assessments (drive_id, site_id, at, capacitor_life_used_fraction, fan_life_used_fraction,
				health_band, risk_score, health_score, report) VALUES ($1, $2, $3, 0.25, 0.1, 'good', 1, 99, $4)`,
				jsonDrive.ID, jsonDrive.SiteID, now, reportJSON)
		} else {
			exec(`INSERT INTO drive_state (drive_id, capacitor_state, fan_state, params_hash, updated_at) VALUES (?, ?, ?, 'h', ?)`,
				jsonDrive.ID, ledgerJSON, ledgerJSON, now)
			exec(`INSERT INTO drive_state (drive_id, capacitor_state, fan_state, params_hash, updated_at) VALUES (?, ?, ?, 'h', ?)`,
				binDrive.ID, []byte{1, 2, 3}, []byte{4, 5}, now)
			exec(`INSERT INTO assessments (drive_id, site_id, at, capacitor_life_used_fraction, fan_life_used_fraction,
				health_band, risk_score, health_score, report) VALUES (?, ?, ?, 0.25, 0.1, 'good', 1, 99, ?)`,
				jsonDrive.ID, jsonDrive.SiteID, now, reportJSON)
		}

		v, err := old.Migrate(ctx)
		if err != nil {
			t.Fatalf("upgrade: %v", err)
		}
		if v < 11 {
			t.Fatalf("upgraded to version %d, want 11 or later", v)
		}
		var states []int64
		if err := old.DB(ctx).Table("drive_state").Order("drive_id").Pluck("drive_id", &states).Error; err != nil {
			t.Fatal(err)
		}
		want := []int64{}
		if d == store.SQLite {
			want = []int64{binDrive.ID} // binary ledgers stay
		}
		if len(states) != len(want) || (len(want) == 1 && states[0] != want[0]) {
			t.Errorf("drive states after the upgrade: %v, want %v (the JSON ledgers dropped)", states, want)
		}
		if d == store.Postgres {
			for _, col := range []string{"drive_state.capacitor_state", "drive_state.fan_state", "assessments.report"} {
				var typ string
				table, column, _ := strings.Cut(col, ".")
				if err := old.SQL().QueryRowContext(ctx, `SELECT data_type FROM information_schema.columns
					WHERE table_schema = current_schema() AND table_name = $1 AND column_name = $2`, table, column).Scan(&typ); err != nil {
					t.Fatal(err)
				}
				if typ != "bytea" {
					t.Errorf("%s is %s after the upgrade, want bytea", col, typ)
				}
			}
		}
		a, err := old.LatestAssessment(ctx, jsonDrive.ID)
		if err != nil {
			t.Fatal(err)
		}
		var got map[string]any
		if err := json.Unmarshal(a.Report, &got); err != nil {
			t.Fatalf("report after the upgrade %q: %v", a.Report, err)
		}
		if len(got) != 1 || got["at"] != 1772323200.0 {
			t.Errorf("report after the upgrade %s, want %s", a.Report, reportJSON)
		}
		// A second run finds nothing to do.
		if _, err := old.Migrate(ctx); err != nil {
			t.Fatal(err)
		}
	})
}
