package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// PlanningData is what the planning code (forecast, fleet reliability,
// proposals) reads of the register and the latest assessments, within the
// principal's sites, loaded with a fixed number of queries.
type PlanningData struct {
	// At is the store's clock when the data was read.
	At        time.Time
	Sites     map[int64]Site
	Areas     map[int64]Area
	Models    map[int64]DriveModel
	Positions map[int64]Position
	// Drives are every drive, by id.
	Drives []Drive
	// Components are every component, fitted now or removed, by drive and
	// fitting time.
	Components []Component
	// Installations are every stay of a drive at a position, by drive and
	// time.
	Installations []Installation
	// Failures are the failure events, oldest first.
	Failures []Event
	// Lives holds each assessed drive's latest life position, by drive id.
	Lives map[int64]AssessmentLife
	// Findings are the unresolved findings that are open or acknowledged
	// (not suppressed), by id.
	Findings []Finding
}

// AssessmentLife is the part of a drive's latest assessment that planning
// uses: its risk and the capacitor and fan life reports.
type AssessmentLife struct {
	DriveID    int64
	SiteID     int64
	PositionID *int64
	At         time.Time
	RiskScore  float64
	HealthBand health.Band
	Capacitor  health.LifeReport
	Fan        health.LifeReport
}

// LoadPlanningData reads the planning data within the principal's sites.
func (s *Store) LoadPlanningData(ctx context.Context) (*PlanningData, error) {
	db := s.db.WithContext(ctx)
	out := &PlanningData{At: s.now(), Lives: map[int64]AssessmentLife{}}
	var err error
	if out.Sites, err = scopedMap[Site](ctx, db); err != nil {
		return nil, err
	}
	if out.Areas, err = scopedMap[Area](ctx, db); err != nil {
		return nil, err
	}
	if out.Models, err = scopedMap[DriveModel](ctx, db); err != nil {
		return nil, err
	}
	if out.Positions, err = scopedMap[Position](ctx, db); err != nil {
		return nil, err
	}
	if err := scoped(ctx, db.Model(&Drive{}), driveInfo).Order("id").Find(&out.Drives).Error; err != nil {
		return nil, fmt.Errorf("load drives: %w", translate(err))
	}
	if err := scoped(ctx, db.Model(&Component{}), componentInfo).Order("drive_id, installed_at, id").Find(&out.Components).Error; err != nil {
		return nil, fmt.Errorf("load components: %w", translate(err))
	}
	if err := scoped(ctx, db.Model(&Installation{}), installationInfo).Order("drive_id, installed_at, id").Find(&out.Installations).Error; err != nil {
		return nil, fmt.Errorf("load installations: %w", translate(err))
	}
	if err := scoped(ctx, db.Model(&Event{}), eventInfo).Where("type = ?", health.EventFailure).Order("at, id").Find(&out.Failures).Error; err != nil {
		return nil, fmt.Errorf("load failures: %w", translate(err))
	}
	if err := scoped(ctx, db.Model(&Finding{}), findingInfo).Where("status IN ?", []FindingStatus{FindingOpen, FindingAcknowledged}).
		Order("id").Find(&out.Findings).Error; err != nil {
		return nil, fmt.Errorf("load findings: %w", translate(err))
	}
	if err := loadLives(ctx, db, s.dialect, out.Lives); err != nil {
		return nil, err
	}
	return out, nil
}

// scopedMap loads every row of T within the principal's sites into a map
// by id.
func scopedMap[T any, P Record[T]](ctx context.Context, db *gorm.DB) (map[int64]T, error) {
	info := Info[T, P]()
	var rows []T
	if err := scoped(ctx, db.Model(new(T)), info).Order("id").Find(&rows).Error; err != nil {
		return nil, fmt.Errorf("load %s: %w", info.Table, translate(err))
	}
	out := make(map[int64]T, len(rows))
	for i := range rows {
		out[P(&rows[i]).Key()] = rows[i]
	}
	return out, nil
}

// assessmentScope limits assessments to the principal's sites.
var assessmentScope = &ResourceInfo{Name: "assessments", Table: "assessments", scope: "site_id IN ?"}

// loadLives decodes the life reports of the latest assessments in batches,
// so a large fleet's full reports are never all in memory at once. Only
// the capacitor and fan parts of each report are read from the database:
// decoding whole reports costs several times more than the rest of the
// planning data.
func loadLives(ctx context.Context, db *gorm.DB, dialect Dialect, into map[int64]AssessmentLife) error {
	type row struct {
		DriveID    int64
		SiteID     int64
		PositionID *int64
		At         time.Time
		RiskScore  float64
		HealthBand health.Band
		// Parts is the JSON array [capacitor, fan] of the report's parts,
		// cut out by the database in one pass over the report.
		Parts []byte
	}
	// The report is JSON kept as bytes (see Assessment.Report), so it is
	// read as text before the parts are cut out.
	parts := "(SELECT jsonb_build_array(j->'capacitor', j->'fan') FROM (SELECT convert_from(report, 'UTF8')::jsonb AS j) r) AS parts"
	if dialect == SQLite {
		parts = "json_extract(CAST(report AS TEXT), '$.capacitor', '$.fan') AS parts"
	}
	var batch []row
	var decodeErr error
	res := scoped(ctx, db.Table("assessments"), assessmentScope).
		Select("drive_id, site_id, position_id, at, risk_score, health_band, "+parts).Order("drive_id").
		FindInBatches(&batch, 500, func(tx *gorm.DB, _ int) error {
			for _, r := range batch {
				var lives [2]*health.LifeReport
				if err := json.Unmarshal(r.Parts, &lives); err != nil {
					decodeErr = fmt.Errorf("decode the capacitor and fan life of drive %d's assessment: %w", r.DriveID, err)
					return decodeErr
				}
				l := AssessmentLife{DriveID: r.DriveID, SiteID: r.SiteID, PositionID: r.PositionID, At: r.At.UTC(),
					RiskScore: r.RiskScore, HealthBand: r.HealthBand}
				if lives[0] != nil {
					l.Capacitor = *lives[0]
				}
				if lives[1] != nil {
					l.Fan = *lives[1]
				}
				into[r.DriveID] = l
			}
			return nil
		})
	if decodeErr != nil {
		return decodeErr
	}
	if res.Error != nil {
		return fmt.Errorf("load assessments: %w", translate(res.Error))
	}
	return nil
}

// AssessmentDaysOf returns the daily assessments of the drives, by drive
// and day, within the principal's sites.
func (s *Store) AssessmentDaysOf(ctx context.Context, driveIDs []int64) ([]AssessmentDay, error) {
	if len(driveIDs) == 0 {
		return nil, nil
	}
	var out []AssessmentDay
	q := s.db.WithContext(ctx).Where("drive_id IN ?", uniq(driveIDs))
	if p := PrincipalFrom(ctx); !p.AllSites() {
		q = q.Where("drive_id IN (SELECT id FROM drives WHERE site_id IN ?)", p.Sites)
	}
	if err := q.Order("drive_id, day").Find(&out).Error; err != nil {
		return nil, fmt.Errorf("load assessment history: %w", translate(err))
	}
	return out, nil
}
