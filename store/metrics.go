package store

import (
	"context"
	"fmt"
	"time"

	"kelvard/health"
)

// FleetSnapshot is what the metrics collector exports, read from the store
// at scrape time so every replica reports the same values.
type FleetSnapshot struct {
	// Sites maps site id to name, for every site (so zero counts are
	// exported too).
	Sites map[int64]string
	// Bands counts assessed drives by site and health band.
	Bands map[int64]map[health.Band]int64
	// Findings counts open and acknowledged findings.
	Findings []FindingCount
	// EndOfLife counts drives by site whose capacitors reach end of life
	// within each window (cumulative: within 180 days includes within 90).
	EndOfLife map[int64]map[time.Duration]int64
	// Drives holds per-drive values when the fleet is at most the
	// per-drive limit; DriveCount is the fleet size either way.
	Drives     []DriveMetric
	DriveCount int64
}

// DriveMetric is one drive's exported values.
type DriveMetric struct {
	Serial            string
	Position          string
	Site              string
	CapacitorLifeUsed float64
	FanLifeUsed       float64
	Utilisation       *float64
}

// EndOfLifeWindows are the horizons of kelvard_capacitor_end_of_life_drives.
var endOfLifeWindows = []time.Duration{90 * 24 * time.Hour, 180 * 24 * time.Hour, 365 * 24 * time.Hour}

// EndOfLifeWindows returns the end-of-life horizons, shortest first.
func EndOfLifeWindows() []time.Duration { return append([]time.Duration(nil), endOfLifeWindows...) }

// Snapshot reads the fleet aggregates, and the per-drive values when the
// fleet has at most perDriveLimit assessed drives, in a few queries.
func (s *Store) Snapshot(ctx context.Context, now time.Time, perDriveLimit int) (FleetSnapshot, error) {
	db := s.db.WithContext(ctx)
	snap := FleetSnapshot{Sites: map[int64]string{}, Bands: map[int64]map[health.Band]int64{}, EndOfLife: map[int64]map[time.Duration]int64{}}
	var sites []Site
	if err := db.Select("id", "name").Find(&sites).Error; err != nil {
		return snap, fmt.Errorf("metrics sites: %w", translate(err))
	}
	for _, st := range sites {
		snap.Sites[st.ID] = st.Name
		snap.Bands[st.ID] = map[health.Band]int64{}
		snap.EndOfLife[st.ID] = map[time.Duration]int64{}
	}
	var bands []struct {
		SiteID     int64
		HealthBand health.Band
		N          int64
	}
	if err := db.Table("assessments").Select("site_id, health_band, count(*) AS n").Group("site_id, health_band").Scan(&bands).Error; err != nil {
		return snap, fmt.Errorf("metrics bands: %w", translate(err))
	}
	for _, b := range bands {
		if m, ok := snap.Bands[b.SiteID]; ok {
			m[b.HealthBand] = b.N
		}
		snap.DriveCount += b.N
	}
	var err error
	if snap.Findings, err = s.OpenFindingCounts(ctx); err != nil {
		return snap, err
	}
	for _, w := range endOfLifeWindows {
		var eol []struct {
			SiteID int64
			N      int64
		}
		if err := db.Table("assessments").Select("site_id, count(*) AS n").
			Where("capacitor_end_of_life IS NOT NULL AND capacitor_end_of_life <= ?", now.Add(w).UTC()).
			Group("site_id").Scan(&eol).Error; err != nil {
			return snap, fmt.Errorf("metrics end of life: %w", translate(err))
		}
		for _, e := range eol {
			if m, ok := snap.EndOfLife[e.SiteID]; ok {
				m[w] = e.N
			}
		}
	}
	if snap.DriveCount > int64(perDriveLimit) {
		return snap, nil
	}
	err = db.Table("assessments a").
		Select("d.serial, COALESCE(p.tag, '') AS position, s.name AS site, a.capacitor_life_used_fraction AS capacitor_life_used, " +
			"a.fan_life_used_fraction AS fan_life_used, a.utilisation_fraction AS utilisation").
		Joins("JOIN drives d ON d.id = a.drive_id").
		Joins("JOIN sites s ON s.id = a.site_id").
		Joins("LEFT JOIN positions p ON p.id = a.position_id").
		Order("d.serial").Scan(&snap.Drives).Error
	if err != nil {
		return snap, fmt.Errorf("metrics drives: %w", translate(err))
	}
	return snap, nil
}
