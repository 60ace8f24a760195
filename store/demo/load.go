package demo

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"

	"kelvard/store"
	"kelvard/store/csvio"
)

// ErrNotEmpty means the store already holds a register, so the demo is not
// loaded over it.
var ErrNotEmpty = errors.New("the store is not empty")

// LoadProgress reports a load: the stage ("register" or "readings") and
// units done out of total.
type LoadProgress func(stage string, done, total int)

// readingChunk is how many readings go to the store in one transaction.
const readingChunk = 20000

// Load writes the scenario into an empty store through the same paths a
// user's data takes: the register through the CSV importer (so the demo
// files and the store cannot drift apart), the readings through the bulk
// ingest. It answers ErrNotEmpty, and writes nothing, when the store
// already has a site.
func (s *Scenario) Load(ctx context.Context, st *store.Store, progress LoadProgress) error {
	if progress == nil {
		progress = func(string, int, int) {}
	}
	sites, err := store.List[store.Site](ctx, st, store.ListQuery{Limit: 1})
	if err != nil {
		return fmt.Errorf("load demo: %w", err)
	}
	if len(sites.Items) > 0 {
		return ErrNotEmpty
	}
	// Drives are imported again after the installations: replaying the
	// moves sets each removed drive's last-energised time and clears its
	// stores area, and the drives file holds the values that follow.
	files := []string{FileSites, FileAreas, FileModels, FilePositions, FileDrives, FileInstallations, FileDrives, FileComponents, FileEvents}
	for i, name := range files {
		progress("register", i, len(files))
		kind, err := csvio.ParseKind(name[:len(name)-len(".csv")])
		if err != nil {
			return fmt.Errorf("load demo %s: %w", name, err)
		}
		var buf bytes.Buffer
		if err := s.WriteCSV(name, &buf); err != nil {
			return err
		}
		if _, err := csvio.Import(ctx, st, kind, &buf, csvio.Options{}); err != nil {
			return fmt.Errorf("load demo %s: %w", name, err)
		}
	}
	progress("register", len(files), len(files))

	total := s.ReadingCount()
	done := 0
	chunk := make([]store.Reading, 0, readingChunk)
	flush := func() error {
		if len(chunk) == 0 {
			return nil
		}
		if _, err := st.Ingest(ctx, chunk, store.IngestOptions{}); err != nil {
			return fmt.Errorf("load demo readings: %w", err)
		}
		done += len(chunk)
		progress("readings", done, total)
		chunk = chunk[:0]
		return nil
	}
	for r := range s.Readings() {
		chunk = append(chunk, r.storeReading())
		if len(chunk) == readingChunk {
			if err := flush(); err != nil {
				return err
			}
		}
	}
	return flush()
}

// storeReading converts a generated reading to the ingest's form: NaN
// (not logged) becomes a missing value.
func (r Reading) storeReading() store.Reading {
	v := func(x float64) *float64 {
		if math.IsNaN(x) {
			return nil
		}
		return &x
	}
	return store.Reading{Site: r.Site, Position: r.Position, At: r.At,
		InternalAirC: v(r.InternalAirC), AmbientC: v(r.AmbientC), HeatsinkC: v(r.HeatsinkC), CurrentA: v(r.CurrentA),
		PeakCurrentA: v(r.PeakCurrentA), FrequencyHz: v(r.FrequencyHz), BusV: v(r.BusV), BusRippleV: v(r.BusRippleV),
		RunHoursH: v(r.RunHoursH), PowerOnHoursH: v(r.PowerOnHoursH),
		DriveCapacitorLifeUsedFraction: v(r.DriveCapacitorLifeUsedFraction), DriveFanLifeUsedFraction: v(r.DriveFanLifeUsedFraction),
		CapacitanceUF: v(r.CapacitanceUF), ESRMilliohm: v(r.ESRMilliohm)}
}

// ReadingCount returns how many readings the scenario holds.
func (s *Scenario) ReadingCount() int {
	n := 0
	for range s.Readings() {
		n++
	}
	return n
}
