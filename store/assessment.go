package store

import (
	"bytes"
	"cmp"
	"context"
	"database/sql/driver"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"time"

	"gorm.io/gorm"
	"gorm.io/gorm/clause"

	"kelvard/health"
)

// DriveState is one drive's accumulated life: the capacitor and fan
// ledgers of the components fitted now, the last measured-capacitor report,
// and bookkeeping for incremental runs.
type DriveState struct {
	DriveID              int64                 `gorm:"primaryKey"`
	CapacitorComponentID *int64                //
	FanComponentID       *int64                //
	CapacitorState       health.CapacitorState `gorm:"-"`
	FanState             health.FanState       `gorm:"-"`
	// CapacitorLedger and FanLedger are the states as stored, in the
	// ledger's compact binary form without the closed days
	// (health.LifeLedger.MarshalHead), or with them where the days column
	// is NULL (a ledger stored before they were kept apart).
	CapacitorLedger []byte `gorm:"column:capacitor_state"`
	FanLedger       []byte `gorm:"column:fan_state"`
	// CapacitorDays and FanDays are the days columns as stored: closed
	// days written by versions before they went into ledger_day_chunks,
	// or none (emptyDays) once a save has moved them there.
	CapacitorDays NullBytes                       `gorm:"column:capacitor_days"`
	FanDays       NullBytes                       `gorm:"column:fan_days"`
	Measured      *health.CapacitorMeasuredReport `gorm:"serializer:json"`
	// ParamsHash fingerprints every input the ledgers depend on; a change
	// forces a full recompute of the drive.
	ParamsHash string
	// StoredTo is how far a stored drive's shelf ageing has been added.
	StoredTo *time.Time
	// TrendAt is the last window pass (duty, DC bus, heatsink, data quality).
	TrendAt *time.Time
	// UnobservedCapacitorH and UnobservedFanH are installed hours before
	// each ledger's first reading, charged at the observed rate.
	UnobservedCapacitorH float64
	UnobservedFanH       float64
	UpdatedAt            time.Time

	// stored is each ledger's closed days as loaded, which a save compares
	// with to write only the chunks that changed (CarryStored).
	stored [2]storedDays
	// sentChunks counts the chunks the last save wrote or deleted.
	sentChunks int
}

// TableName names the table.
func (DriveState) TableName() string { return "drive_state" }

// NullBytes is a byte slice stored as NULL when nil (the SQLite driver
// stores a nil []byte as an empty blob).
type NullBytes []byte

// Value implements driver.Valuer.
func (b NullBytes) Value() (driver.Value, error) {
	if b == nil {
		return nil, nil
	}
	return []byte(b), nil
}

// Scan implements sql.Scanner.
func (b *NullBytes) Scan(src any) error {
	switch v := src.(type) {
	case nil:
		*b = nil
	case []byte:
		*b = bytes.Clone(v)
	case string:
		*b = []byte(v)
	default:
		return fmt.Errorf("scan %T into bytes", src)
	}
	return nil
}

// stateUpsert writes states over existing rows, keeping the stored closed
// days where a state carries none (unchanged, see encodeLedgers).
func stateUpsert(tx *gorm.DB) (clause.OnConflict, error) {
	stmt := &gorm.Statement{DB: tx}
	if err := stmt.Parse(&DriveState{}); err != nil {
		return clause.OnConflict{}, fmt.Errorf("drive state schema: %w", err)
	}
	var set []string
	for _, name := range stmt.Schema.DBNames {
		if name != "drive_id" && name != "capacitor_days" && name != "fan_days" {
			set = append(set, name)
		}
	}
	up := clause.AssignmentColumns(set)
	for _, name := range []string{"capacitor_days", "fan_days"} {
		up = append(up, clause.Assignment{Column: clause.Column{Name: name},
			Value: gorm.Expr("COALESCE(excluded." + name + ", drive_state." + name + ")")})
	}
	return clause.OnConflict{Columns: []clause.Column{{Name: "drive_id"}}, DoUpdates: up}, nil
}

// Assessment is the latest health of one drive, with its contract fields
// in columns (for lists, filters and metrics) and the whole report.
type Assessment struct {
	DriveID                   int64       `json:"drive_id" gorm:"primaryKey"`
	SiteID                    int64       `json:"site_id"`
	PositionID                *int64      `json:"position_id"`
	At                        time.Time   `json:"at"`
	CapacitorLifeUsedFraction float64     `json:"capacitor_life_used_fraction"`
	CapacitorRemainingH       *float64    `json:"capacitor_remaining_h"`
	CapacitorEndOfLife        *time.Time  `json:"capacitor_end_of_life"`
	FanLifeUsedFraction       float64     `json:"fan_life_used_fraction"`
	FanRemainingH             *float64    `json:"fan_remaining_h"`
	FanEndOfLife              *time.Time  `json:"fan_end_of_life"`
	AllowedCurrentA           *float64    `json:"allowed_current_a"`
	UtilisationFraction       *float64    `json:"utilisation_fraction"`
	HealthBand                health.Band `json:"health_band"`
	RiskScore                 float64     `json:"risk_score"`
	HealthScore               float64     `json:"health_score"`
	// Report is the whole health.DriveAssessment as JSON, kept as bytes:
	// the database need not parse it on every save. The planning queries
	// that cut parts out of it read it as text (store/planning.go).
	Report json.RawMessage `json:"report"`
}

// AssessmentDay is one drive's assessment on one UTC day, kept for trends.
type AssessmentDay struct {
	DriveID                   int64       `json:"drive_id" gorm:"primaryKey"`
	Day                       string      `json:"day" gorm:"primaryKey"`
	PositionID                *int64      `json:"position_id"`
	CapacitorLifeUsedFraction float64     `json:"capacitor_life_used_fraction"`
	FanLifeUsedFraction       float64     `json:"fan_life_used_fraction"`
	CapacitorEndOfLife        *time.Time  `json:"capacitor_end_of_life"`
	UtilisationFraction       *float64    `json:"utilisation_fraction"`
	AllowedCurrentA           *float64    `json:"allowed_current_a"`
	RiskScore                 float64     `json:"risk_score"`
	HealthBand                health.Band `json:"health_band"`
}

// PositionContext is a position with its area and site.
type PositionContext struct {
	Position Position
	Area     Area
	Site     Site
}

// AssessContext is everything the assessment job loads about one drive.
type AssessContext struct {
	Drive Drive
	Model DriveModel
	// Site is the drive's site; StoresArea the area it is kept in, if any.
	Site       Site
	StoresArea *Area
	// Installations is the drive's history, oldest first; Positions holds
	// each position named there.
	Installations []Installation
	Positions     map[int64]PositionContext
	// Capacitor and Fan are the components fitted now.
	Capacitor, Fan *Component
	// State is nil before the first assessment.
	State *DriveState
	// AssessedTo is the last reading the assessment has taken in;
	// RecomputeFrom is set when something since asks for a recompute.
	AssessedTo, RecomputeFrom *time.Time
	// LatestReadingAt is the drive's newest reading (nil without one).
	LatestReadingAt *time.Time
	// Findings holds the unresolved findings; Events the events since the
	// window start.
	Findings []Finding
	Events   []Event
}

// Current returns the position the drive stands at now.
func (c *AssessContext) Current() (PositionContext, bool) {
	if c.Drive.PositionID == nil {
		return PositionContext{}, false
	}
	p, ok := c.Positions[*c.Drive.PositionID]
	return p, ok
}

// AssessmentCandidates returns the drives the next run should assess, in id
// order: with full, every drive that is not retired plus retired drives
// still carrying findings; otherwise drives with readings newer than their
// watermark, drives marked for recompute, drives never assessed, and drives
// whose last assessment is older than staleBefore (so time-driven rules,
// such as a silent position or a due energising, are seen).
//
// The test for new readings is an index range on (drive_id, at) past the
// watermark (beforeAnyReading stands in for a drive never assessed), so
// it costs a probe per drive and partition, not a pass over the drive's
// history: an OR of "no watermark" inside the subquery made PostgreSQL
// read every reading of every drive as a filter.
func (s *Store) AssessmentCandidates(ctx context.Context, full bool, staleBefore time.Time) ([]int64, error) {
	db := s.db.WithContext(ctx)
	var ids []int64
	var err error
	if full {
		err = db.Raw(`SELECT id FROM drives WHERE status <> ?
			UNION SELECT DISTINCT drive_id FROM findings WHERE status <> ? ORDER BY 1`,
			health.StatusRetired, FindingResolved).Scan(&ids).Error
	} else {
		err = db.Raw(`SELECT d.id FROM drives d
			LEFT JOIN drive_watermarks w ON w.drive_id = d.id
			LEFT JOIN assessments a ON a.drive_id = d.id
			WHERE (d.status <> ? AND (a.drive_id IS NULL OR a.at < ? OR w.recompute_from IS NOT NULL
			       OR EXISTS (SELECT 1 FROM readings r WHERE r.drive_id = d.id AND r.at > COALESCE(w.assessed_to, ?))))
			   OR (d.status = ? AND EXISTS (SELECT 1 FROM findings f WHERE f.drive_id = d.id AND f.status <> ?))
			ORDER BY d.id`,
			health.StatusRetired, staleBefore.UTC(), s.timeArg(beforeAnyReading), health.StatusRetired, FindingResolved).Scan(&ids).Error
	}
	if err != nil {
		return nil, fmt.Errorf("find drives to assess: %w", translate(err))
	}
	return ids, nil
}

// beforeAnyReading lies before every reading time kelvard accepts.
var beforeAnyReading = EarliestTime

// LoadAssessContexts loads the contexts of a batch of drives with a fixed
// number of queries, whatever the batch size.
func (s *Store) LoadAssessContexts(ctx context.Context, ids []int64, eventsFrom time.Time) ([]*AssessContext, error) {
	db := s.db.WithContext(ctx)
	var drives []Drive
	if err := db.Where("id IN ?", ids).Order("id").Find(&drives).Error; err != nil {
		return nil, fmt.Errorf("load drives: %w", translate(err))
	}
	out := make([]*AssessContext, len(drives))
	byDrive := map[int64]*AssessContext{}
	modelIDs, siteIDs, areaIDs := []int64{}, []int64{}, []int64{}
	for i, d := range drives {
		out[i] = &AssessContext{Drive: d, Positions: map[int64]PositionContext{}}
		byDrive[d.ID] = out[i]
		modelIDs = append(modelIDs, d.ModelID)
		siteIDs = append(siteIDs, d.SiteID)
		if d.StoresAreaID != nil {
			areaIDs = append(areaIDs, *d.StoresAreaID)
		}
	}
	var ins []Installation
	if err := db.Where("drive_id IN ?", ids).Order("drive_id, installed_at").Find(&ins).Error; err != nil {
		return nil, fmt.Errorf("load installations: %w", translate(err))
	}
	posIDs := []int64{}
	for _, in := range ins {
		c := byDrive[in.DriveID]
		c.Installations = append(c.Installations, in)
		posIDs = append(posIDs, in.PositionID)
	}
	var positions []Position
	if err := db.Where("id IN ?", uniq(posIDs)).Find(&positions).Error; err != nil {
		return nil, fmt.Errorf("load positions: %w", translate(err))
	}
	for _, p := range positions {
		areaIDs = append(areaIDs, p.AreaID)
		siteIDs = append(siteIDs, p.SiteID)
	}
	models, err := byID[DriveModel](db, modelIDs)
	if err != nil {
		return nil, err
	}
	areas, err := byID[Area](db, areaIDs)
	if err != nil {
		return nil, err
	}
	sites, err := byID[Site](db, siteIDs)
	if err != nil {
		return nil, err
	}
	var comps []Component
	if err := db.Where("drive_id IN ? AND removed_at IS NULL", ids).Order("installed_at").Find(&comps).Error; err != nil {
		return nil, fmt.Errorf("load components: %w", translate(err))
	}
	var states []DriveState
	if err := db.Where("drive_id IN ?", ids).Find(&states).Error; err != nil {
		return nil, fmt.Errorf("load drive states: %w", translate(err))
	}
	chunks, err := s.loadDayChunks(ctx, db, ids)
	if err != nil {
		return nil, err
	}
	marks, err := s.loadWatermarks(ctx, db, ids)
	if err != nil {
		return nil, err
	}
	var findings []Finding
	if err := db.Where("drive_id IN ? AND status <> ?", ids, FindingResolved).Order("id").Find(&findings).Error; err != nil {
		return nil, fmt.Errorf("load findings: %w", translate(err))
	}
	var events []Event
	if err := db.Where("drive_id IN ? AND at >= ?", ids, eventsFrom).Order("at").Find(&events).Error; err != nil {
		return nil, fmt.Errorf("load events: %w", translate(err))
	}

	posByID := map[int64]Position{}
	for _, p := range positions {
		posByID[p.ID] = p
	}
	for _, c := range out {
		c.Model = models[c.Drive.ModelID]
		c.Site = sites[c.Drive.SiteID]
		if c.Drive.StoresAreaID != nil {
			a := areas[*c.Drive.StoresAreaID]
			c.StoresArea = &a
		}
		for _, in := range c.Installations {
			p := posByID[in.PositionID]
			c.Positions[p.ID] = PositionContext{Position: p, Area: areas[p.AreaID], Site: sites[p.SiteID]}
		}
	}
	for i := range comps {
		c := byDrive[comps[i].DriveID]
		switch comps[i].Kind {
		case health.ComponentCapacitors:
			c.Capacitor = &comps[i]
		case health.ComponentFan:
			c.Fan = &comps[i]
		}
	}
	for i := range states {
		st := &states[i]
		lo, _ := slices.BinarySearchFunc(chunks, st.DriveID, func(c ledgerDayChunk, id int64) int { return cmp.Compare(c.DriveID, id) })
		hi := lo
		for hi < len(chunks) && chunks[hi].DriveID == st.DriveID {
			hi++
		}
		if err := st.decodeLedgers(chunks[lo:hi]); err != nil {
			return nil, err
		}
		byDrive[st.DriveID].State = st
	}
	for _, m := range marks {
		c := byDrive[m.DriveID]
		c.AssessedTo, c.RecomputeFrom, c.LatestReadingAt = m.AssessedTo, m.RecomputeFrom, m.Latest
	}
	for _, f := range findings {
		byDrive[f.DriveID].Findings = append(byDrive[f.DriveID].Findings, f)
	}
	for _, e := range events {
		byDrive[e.DriveID].Events = append(byDrive[e.DriveID].Events, e)
	}
	return out, nil
}

// byID loads rows of T by id into a map.
func byID[T any, P Record[T]](db *gorm.DB, ids []int64) (map[int64]T, error) {
	var rows []T
	if err := db.Where("id IN ?", uniq(ids)).Find(&rows).Error; err != nil {
		return nil, fmt.Errorf("load %s: %w", Info[T, P]().Table, translate(err))
	}
	out := make(map[int64]T, len(rows))
	for i := range rows {
		out[P(&rows[i]).Key()] = rows[i]
	}
	return out, nil
}

func uniq(ids []int64) []int64 {
	out := slices.Clone(ids)
	slices.Sort(out)
	out = slices.Compact(out)
	if len(out) == 0 {
		return []int64{0}
	}
	return out
}

// AssessResult is what the job saves for one drive.
type AssessResult struct {
	DriveID int64
	// Retired drives only resolve their findings.
	Retired bool
	State   DriveState
	// SaveState is false when the ledgers did not move (no new readings),
	// so the large state row is not rewritten.
	SaveState  bool
	Assessment health.DriveAssessment
	SiteID     int64
	AreaID     *int64
	PositionID *int64
	// AssessedTo is the newest reading taken in; RecomputeSeen the
	// recompute mark the run started from (cleared only if unchanged).
	AssessedTo    *time.Time
	RecomputeSeen *time.Time
	// ScannedAfter and Scanned say which readings an incremental run took
	// in: Scanned readings after ScannedAfter up to AssessedTo.
	ScannedAfter *time.Time
	Scanned      int64
	// Existing holds the unresolved findings loaded with the context.
	Existing []Finding
}

// SaveOptions tune SaveAssessments.
type SaveOptions struct {
	// ResolveAfter is how long a finding's condition must stay cleared
	// before it resolves (default 24 h).
	ResolveAfter time.Duration
	// Notify, when true, queues a notification for each new critical
	// finding.
	Notify bool
}

// SaveAssessments saves a batch of results in one transaction: states,
// latest assessments, the day's history rows, findings and watermarks. A
// run cut short leaves either all of a batch or none of it.
func (s *Store) SaveAssessments(ctx context.Context, results []AssessResult, opts SaveOptions) error {
	if opts.ResolveAfter == 0 {
		opts.ResolveAfter = 24 * time.Hour
	}
	return s.txConn(ctx, func(tx *gorm.DB, pg pgRunner) error {
		var states []DriveState
		var chunkWrites dayChunkWrites
		var rows []Assessment
		var days []AssessmentDay
		marks := map[time.Time]*findingMarks{}
		for i := range results {
			r := &results[i]
			at := time.Unix(r.Assessment.At, 0).UTC()
			if r.Retired {
				if err := resolveFindingsOf(tx, r.DriveID, at, "drive retired"); err != nil {
					return err
				}
				if err := tx.Where("drive_id = ?", r.DriveID).Delete(&Assessment{}).Error; err != nil {
					return fmt.Errorf("drop assessment of retired drive %d: %w", r.DriveID, translate(err))
				}
				continue
			}
			if r.SaveState {
				r.State.DriveID, r.State.UpdatedAt = r.DriveID, at
				if err := r.State.encodeLedgers(&chunkWrites); err != nil {
					return fmt.Errorf("encode ledgers of drive %d: %w", r.DriveID, err)
				}
				states = append(states, r.State)
			}
			row, err := assessmentRow(r)
			if err != nil {
				return err
			}
			rows = append(rows, row)
			days = append(days, AssessmentDay{DriveID: r.DriveID, Day: at.Format(time.DateOnly), PositionID: r.PositionID,
				CapacitorLifeUsedFraction: row.CapacitorLifeUsedFraction, FanLifeUsedFraction: row.FanLifeUsedFraction,
				CapacitorEndOfLife: row.CapacitorEndOfLife, UtilisationFraction: row.UtilisationFraction,
				AllowedCurrentA: row.AllowedCurrentA, RiskScore: row.RiskScore, HealthBand: row.HealthBand})
			cur := make([]health.Finding, len(r.Assessment.Findings))
			for j, f := range r.Assessment.Findings {
				f.Evidence = finiteEvidence(f.Evidence)
				cur[j] = f
			}
			m := marks[at]
			if m == nil {
				m = &findingMarks{}
				marks[at] = m
			}
			opened, err := reconcileFindings(tx, FindingUpdate{DriveID: r.DriveID, SiteID: r.SiteID, AreaID: r.AreaID,
				PositionID: r.PositionID, At: at, Current: cur, Evaluated: r.Assessment.Evaluated}, r.Existing, opts.ResolveAfter, m)
			if err != nil {
				return err
			}
			if opts.Notify {
				for _, f := range opened {
					if err := queueNotification(tx, f, at); err != nil {
						return err
					}
				}
			}
		}
		for at, m := range marks {
			if err := m.writeChanged(ctx, tx, pg, s.now()); err != nil {
				return err
			}
			if err := m.write(tx, at); err != nil {
				return err
			}
		}
		if err := s.advanceWatermarks(tx, results); err != nil {
			return err
		}
		if pg != nil {
			return saveAssessedPG(ctx, pg, states, rows, days, &chunkWrites)
		}
		if err := chunkWrites.writeGORM(tx); err != nil {
			return err
		}
		if len(states) > 0 {
			upsert, err := stateUpsert(tx)
			if err != nil {
				return err
			}
			if err := tx.Clauses(upsert).CreateInBatches(states, 100).Error; err != nil {
				return fmt.Errorf("save drive states: %w", translate(err))
			}
		}
		if len(rows) > 0 {
			if err := tx.Clauses(clause.OnConflict{UpdateAll: true}).CreateInBatches(rows, 200).Error; err != nil {
				return fmt.Errorf("save assessments: %w", translate(err))
			}
			if err := tx.Clauses(clause.OnConflict{UpdateAll: true}).CreateInBatches(days, 500).Error; err != nil {
				return fmt.Errorf("save assessment history: %w", translate(err))
			}
		}
		return nil
	})
}

// assessmentRow flattens a result into the assessments row.
func assessmentRow(r *AssessResult) (Assessment, error) {
	a := r.Assessment
	report, err := SafeJSON(a)
	if err != nil {
		return Assessment{}, fmt.Errorf("encode assessment of drive %d: %w", r.DriveID, err)
	}
	row := Assessment{
		DriveID: r.DriveID, SiteID: r.SiteID, PositionID: r.PositionID, At: time.Unix(a.At, 0).UTC(),
		CapacitorLifeUsedFraction: finiteOr(a.Capacitor.LifeUsedAtAssessmentFraction, 0),
		CapacitorRemainingH:       finitePtr(a.Capacitor.RemainingH),
		CapacitorEndOfLife:        unixPtr(a.Capacitor.Projected, a.Capacitor.EndOfLifeAt),
		FanLifeUsedFraction:       finiteOr(a.Fan.LifeUsedAtAssessmentFraction, 0),
		FanRemainingH:             finitePtr(a.Fan.RemainingH),
		FanEndOfLife:              unixPtr(a.Fan.Projected, a.Fan.EndOfLifeAt),
		HealthBand:                a.Risk.Band, RiskScore: a.Risk.RiskScore, HealthScore: a.Risk.HealthScore,
		Report: report,
	}
	if a.Capacitor.EndReached {
		row.CapacitorEndOfLife = unixPtr(true, a.Capacitor.EndReachedAt)
	}
	if a.Fan.EndReached {
		row.FanEndOfLife = unixPtr(true, a.Fan.EndReachedAt)
	}
	if a.Allowance != nil {
		row.AllowedCurrentA = finitePtr(a.Allowance.AllowedA)
	}
	if a.Duty != nil && a.Duty.Utilisation.Defined {
		row.UtilisationFraction = finitePtr(a.Duty.Utilisation.Fraction)
	}
	return row, nil
}

func finiteOr(v, def float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return def
	}
	return v
}

func finitePtr(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func unixPtr(ok bool, s int64) *time.Time {
	if !ok || s == 0 {
		return nil
	}
	t := time.Unix(s, 0).UTC()
	return &t
}

// LatestAssessment returns the latest assessment of a drive within the
// principal's sites.
func (s *Store) LatestAssessment(ctx context.Context, driveID int64) (Assessment, error) {
	if _, err := Get[Drive](ctx, s, driveID); err != nil {
		return Assessment{}, err
	}
	var a Assessment
	err := s.db.WithContext(ctx).Where("drive_id = ?", driveID).Take(&a).Error
	if errNoRows(err) {
		return a, fmt.Errorf("assessment of drive %d: %w", driveID, ErrNotFound)
	}
	if err != nil {
		return a, fmt.Errorf("load assessment of drive %d: %w", driveID, translate(err))
	}
	return a, nil
}

// AssessmentHistory returns a drive's daily assessments between from and
// to (inclusive days), oldest first.
func (s *Store) AssessmentHistory(ctx context.Context, driveID int64, from, to time.Time) ([]AssessmentDay, error) {
	if _, err := Get[Drive](ctx, s, driveID); err != nil {
		return nil, err
	}
	var out []AssessmentDay
	err := s.db.WithContext(ctx).Where("drive_id = ? AND day >= ? AND day <= ?", driveID, from.UTC().Format(time.DateOnly), to.UTC().Format(time.DateOnly)).
		Order("day").Find(&out).Error
	if err != nil {
		return nil, fmt.Errorf("load history of drive %d: %w", driveID, translate(err))
	}
	return out, nil
}
