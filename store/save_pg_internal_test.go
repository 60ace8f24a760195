package store

import (
	"slices"
	"strings"
	"sync"
	"testing"

	"gorm.io/gorm/schema"
)

// TestStagedColumns holds the column lists of the PostgreSQL save path
// (save_pg.go) to the GORM models they write, and each pgRow to its list:
// a field added to a model must be added there too.
func TestStagedColumns(t *testing.T) {
	t.Parallel()
	st := DriveState{}
	stRow, err := st.pgRow()
	if err != nil {
		t.Fatal(err)
	}
	day := AssessmentDay{Day: "2026-06-01"}
	dayRow, err := day.pgRow()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		model   any
		up      stagedUpsert
		columns []string
		row     []any
	}{
		{&DriveState{}, driveStateUpsert, driveStateColumns, stRow},
		{&Assessment{}, assessmentUpsert, assessmentColumns, (&Assessment{}).pgRow()},
		{&AssessmentDay{}, assessmentDayUpsert, assessmentDayColumns, dayRow},
		{&ledgerDayChunk{}, dayChunkUpsert, dayChunkColumns, []any{int64(0), int16(0), int32(0), []byte{}}},
	} {
		sch, err := schema.Parse(c.model, &sync.Map{}, schema.NamingStrategy{})
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(sch.DBNames, c.columns) {
			t.Errorf("%s: GORM columns %v, staged upsert writes %v", sch.Table, sch.DBNames, c.columns)
		}
		if sch.Table != c.up.table || !slices.Equal(c.up.columns, c.columns) {
			t.Errorf("%s: upsert of table %s with columns %v", sch.Table, c.up.table, c.up.columns)
		}
		if len(c.row) != len(c.columns) {
			t.Errorf("%s: pgRow gives %d values for %d columns", sch.Table, len(c.row), len(c.columns))
		}
		// Every column but the conflict target's is set on conflict.
		for _, col := range c.columns {
			key := slices.Contains(strings.Split(c.up.conflict, ", "), col)
			if set := strings.Contains(c.up.set, col+" = "); set == key {
				t.Errorf("%s: column %s in the SET list: %v, in the conflict target: %v", sch.Table, col, set, key)
			}
		}
	}
}
