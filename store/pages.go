package store

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// This file holds the read queries behind the server-rendered pages (package
// web). Each page costs a fixed, small number of queries whatever the size
// of the fleet: lists are joined and aggregated in the database, never
// loaded row by row. Every query honours the principal's site limit.

// FleetFilter selects drives on the fleet page. Zero values do not filter.
type FleetFilter struct {
	SiteID int64
	AreaID int64
	Band   health.Band
	// Severity keeps drives whose worst open or acknowledged finding is at
	// least this severe.
	Severity health.Severity
	// EndOfLifeWithin keeps drives whose capacitors reach end of life (or
	// have reached it) within this time of now.
	EndOfLifeWithin time.Duration
	Status          health.DriveStatus
	// Search matches a position tag or a drive serial, in part, any case.
	Search string
}

// Validate checks the enumerations and sizes of the filter.
func (f FleetFilter) Validate() error {
	var fe fieldErrors
	if f.Band != "" && !f.Band.Valid() {
		fe.add("band", "must be one of %v", health.Bands())
	}
	if f.Severity != "" && !f.Severity.Valid() {
		fe.add("severity", "must be one of %v", health.Severities())
	}
	if f.Status != "" && !f.Status.Valid() {
		fe.add("status", "must be one of %v", health.DriveStatuses())
	}
	if f.EndOfLifeWithin < 0 {
		fe.add("eol", "must not be negative")
	}
	fe.text("q", f.Search, false, 100)
	return fe.err()
}

// FleetRow is one assessed drive on the fleet page.
type FleetRow struct {
	DriveID             int64
	Serial              string
	Status              health.DriveStatus
	ModelName           string
	SiteID              int64
	SiteName            string
	AreaID              *int64
	AreaName            string
	PositionID          *int64
	PositionTag         string
	PositionDescription string
	Criticality         health.Criticality
	HealthBand          health.Band
	RiskScore           float64
	CapacitorLifeUsed   float64
	CapacitorEndOfLife  *time.Time
	FanLifeUsed         float64
	FanEndOfLife        *time.Time
	Utilisation         *float64
	AssessedAt          time.Time
	// OpenFindings counts open and acknowledged findings; WorstRank is the
	// Severity.Rank of the worst of them (0 without any).
	OpenFindings int64
	WorstRank    int
}

// WorstSeverity returns the severity of the drive's worst open finding, ""
// without one.
func (r FleetRow) WorstSeverity() health.Severity { return severityOfRank(r.WorstRank) }

// FleetSummary counts the drives that match a filter's place, severity,
// status and search (not its band or end-of-life window, so the counts can
// offer those as choices).
type FleetSummary struct {
	Total int64
	Bands map[health.Band]int64
	// EndOfLife counts drives whose capacitors reach end of life within
	// each of EndOfLifeWindows (cumulative; past ends count in every one).
	EndOfLife map[time.Duration]int64
	// Matching counts the drives that match the whole filter.
	Matching int64
}

// FleetView is the fleet page's data: the summary and one page of rows,
// riskiest first.
type FleetView struct {
	Summary FleetSummary
	Rows    []FleetRow
}

// severityRankSQL turns a severity column into Severity.Rank.
const severityRankSQL = "CASE %s WHEN 'critical' THEN 4 WHEN 'major' THEN 3 WHEN 'minor' THEN 2 WHEN 'advice' THEN 1 ELSE 0 END"

func severityOfRank(rank int) health.Severity {
	for _, s := range health.Severities() {
		if s.Rank() == rank {
			return s
		}
	}
	return ""
}

// fleetFrom is the FROM clause shared by the fleet queries: each assessed
// drive with its model, site, current position and area (the stores area
// for a drive in stores), and its open findings aggregated.
var fleetFrom = `FROM assessments a
JOIN drives d ON d.id = a.drive_id
JOIN drive_models m ON m.id = d.model_id
JOIN sites s ON s.id = a.site_id
LEFT JOIN positions p ON p.id = d.position_id
LEFT JOIN areas ar ON ar.id = COALESCE(p.area_id, d.stores_area_id)
LEFT JOIN (SELECT drive_id, count(*) AS n, max(` + fmt.Sprintf(severityRankSQL, "severity") + `) AS worst
           FROM findings WHERE status IN ('open', 'acknowledged') GROUP BY drive_id) f ON f.drive_id = a.drive_id`

// fleetWhere builds the conditions of a fleet filter; withBandEOL adds the
// band and end-of-life conditions.
func fleetWhere(ctx context.Context, f FleetFilter, now time.Time, withBandEOL bool) (string, []any) {
	conds := []string{"1 = 1"}
	var args []any
	if p := PrincipalFrom(ctx); !p.AllSites() {
		conds = append(conds, "a.site_id IN ?")
		args = append(args, p.Sites)
	}
	if f.SiteID > 0 {
		conds = append(conds, "a.site_id = ?")
		args = append(args, f.SiteID)
	}
	if f.AreaID > 0 {
		conds = append(conds, "ar.id = ?")
		args = append(args, f.AreaID)
	}
	if f.Severity != "" {
		conds = append(conds, "COALESCE(f.worst, 0) >= ?")
		args = append(args, f.Severity.Rank())
	}
	if f.Status != "" {
		conds = append(conds, "d.status = ?")
		args = append(args, f.Status)
	}
	if q := strings.TrimSpace(f.Search); q != "" {
		like := "%" + strings.ToLower(likeEscape(q)) + "%"
		conds = append(conds, `(LOWER(COALESCE(p.tag, '')) LIKE ? ESCAPE '\' OR LOWER(d.serial) LIKE ? ESCAPE '\')`)
		args = append(args, like, like)
	}
	if withBandEOL {
		if f.Band != "" {
			conds = append(conds, "a.health_band = ?")
			args = append(args, f.Band)
		}
		if f.EndOfLifeWithin > 0 {
			conds = append(conds, "a.capacitor_end_of_life IS NOT NULL AND a.capacitor_end_of_life <= ?")
			args = append(args, now.Add(f.EndOfLifeWithin).UTC())
		}
	}
	return strings.Join(conds, " AND "), args
}

// likeEscape escapes the LIKE wildcards in s.
func likeEscape(s string) string {
	return strings.NewReplacer(`\`, `\\`, `%`, `\%`, `_`, `\_`).Replace(s)
}

// Fleet returns the fleet page in two queries: the summary counts and one
// page of drives ordered by risk score (highest first, then serial).
func (s *Store) Fleet(ctx context.Context, f FleetFilter, now time.Time, limit, offset int) (FleetView, error) {
	if err := f.Validate(); err != nil {
		return FleetView{}, err
	}
	if limit <= 0 || limit > MaxLimit {
		limit = DefaultLimit
	}
	db := s.db.WithContext(ctx)
	view := FleetView{Summary: FleetSummary{Bands: map[health.Band]int64{}, EndOfLife: map[time.Duration]int64{}}}

	where, args := fleetWhere(ctx, f, now, false)
	sel := []string{"count(*) AS total"}
	var selArgs []any
	for _, b := range health.Bands() {
		sel = append(sel, "COALESCE(SUM(CASE WHEN a.health_band = ? THEN 1 ELSE 0 END), 0) AS band_"+string(b))
		selArgs = append(selArgs, b)
	}
	for i, w := range endOfLifeWindows {
		sel = append(sel, fmt.Sprintf("COALESCE(SUM(CASE WHEN a.capacitor_end_of_life IS NOT NULL AND a.capacitor_end_of_life <= ? THEN 1 ELSE 0 END), 0) AS eol_%d", i))
		selArgs = append(selArgs, now.Add(w).UTC())
	}
	mWhere, mArgs := fleetWhere(ctx, FleetFilter{Band: f.Band, EndOfLifeWithin: f.EndOfLifeWithin}, now, true)
	sel = append(sel, "COALESCE(SUM(CASE WHEN "+mWhere+" THEN 1 ELSE 0 END), 0) AS matching")
	selArgs = append(selArgs, mArgs...)
	var sum struct {
		Total                                      int64
		BandSound, BandWatch, BandPlan, BandUrgent int64
		Eol0                                       int64 `gorm:"column:eol_0"`
		Eol1                                       int64 `gorm:"column:eol_1"`
		Eol2                                       int64 `gorm:"column:eol_2"`
		Matching                                   int64
	}
	q := "SELECT " + strings.Join(sel, ", ") + " " + fleetFrom + " WHERE " + where
	if err := db.Raw(q, append(selArgs, args...)...).Scan(&sum).Error; err != nil {
		return view, fmt.Errorf("fleet summary: %w", translate(err))
	}
	view.Summary.Total, view.Summary.Matching = sum.Total, sum.Matching
	view.Summary.Bands[health.BandSound], view.Summary.Bands[health.BandWatch] = sum.BandSound, sum.BandWatch
	view.Summary.Bands[health.BandPlan], view.Summary.Bands[health.BandUrgent] = sum.BandPlan, sum.BandUrgent
	for i, n := range []int64{sum.Eol0, sum.Eol1, sum.Eol2} {
		view.Summary.EndOfLife[endOfLifeWindows[i]] = n
	}

	where, args = fleetWhere(ctx, f, now, true)
	q = `SELECT a.drive_id, d.serial, d.status, m.name AS model_name, a.site_id, s.name AS site_name,
		ar.id AS area_id, COALESCE(ar.name, '') AS area_name, d.position_id, COALESCE(p.tag, '') AS position_tag,
		COALESCE(p.description, '') AS position_description, COALESCE(p.criticality, '') AS criticality,
		a.health_band, a.risk_score, a.capacitor_life_used_fraction AS capacitor_life_used, a.capacitor_end_of_life,
		a.fan_life_used_fraction AS fan_life_used, a.fan_end_of_life, a.utilisation_fraction AS utilisation, a.at AS assessed_at,
		COALESCE(f.n, 0) AS open_findings, COALESCE(f.worst, 0) AS worst_rank ` + fleetFrom + ` WHERE ` + where + `
		ORDER BY a.risk_score DESC, d.serial LIMIT ? OFFSET ?`
	if err := db.Raw(q, append(args, limit, max(offset, 0))...).Scan(&view.Rows).Error; err != nil {
		return view, fmt.Errorf("fleet drives: %w", translate(err))
	}
	return view, nil
}

// SitePlaces is a site and its areas, by name.
type SitePlaces struct {
	Site  Site
	Areas []Area
}

// Places lists the sites the principal may see and their areas, by name,
// in two queries.
func (s *Store) Places(ctx context.Context) ([]SitePlaces, error) {
	db := s.db.WithContext(ctx)
	var sites []Site
	if err := scoped(ctx, db.Model(&Site{}), siteInfo).Order("name").Find(&sites).Error; err != nil {
		return nil, fmt.Errorf("list sites: %w", translate(err))
	}
	var areas []Area
	if err := scoped(ctx, db.Model(&Area{}), areaInfo).Order("name").Find(&areas).Error; err != nil {
		return nil, fmt.Errorf("list areas: %w", translate(err))
	}
	out := make([]SitePlaces, len(sites))
	at := map[int64]int{}
	for i, st := range sites {
		out[i].Site = st
		at[st.ID] = i
	}
	for _, a := range areas {
		if i, ok := at[a.SiteID]; ok {
			out[i].Areas = append(out[i].Areas, a)
		}
	}
	return out, nil
}

// PlaceCount counts positions and installed drives by health band in one
// area.
type PlaceCount struct {
	AreaID    int64
	Positions int64
	Bands     map[health.Band]int64
}

// AreaCounts counts the positions of every area the principal may see and
// the assessed drives standing in them by band, in one query.
func (s *Store) AreaCounts(ctx context.Context) (map[int64]*PlaceCount, error) {
	var rows []struct {
		AreaID     int64
		HealthBand *string
		N          int64
	}
	q := s.db.WithContext(ctx).Table("positions p").
		Select("p.area_id, a.health_band, count(*) AS n").
		Joins("LEFT JOIN drives d ON d.position_id = p.id").
		Joins("LEFT JOIN assessments a ON a.drive_id = d.id").
		Group("p.area_id, a.health_band")
	if pr := PrincipalFrom(ctx); !pr.AllSites() {
		q = q.Where("p.site_id IN ?", pr.Sites)
	}
	if err := q.Scan(&rows).Error; err != nil {
		return nil, fmt.Errorf("count positions by area: %w", translate(err))
	}
	out := map[int64]*PlaceCount{}
	for _, r := range rows {
		c := out[r.AreaID]
		if c == nil {
			c = &PlaceCount{AreaID: r.AreaID, Bands: map[health.Band]int64{}}
			out[r.AreaID] = c
		}
		c.Positions += r.N
		if r.HealthBand != nil {
			c.Bands[health.Band(*r.HealthBand)] += r.N
		}
	}
	return out, nil
}

// PositionVerdict is a position with the drive standing in it now, if
// any, and the enclosure report of that drive's latest assessment (raw
// JSON of health.EnclosureReport; empty when there is no drive or no
// assessment).
type PositionVerdict struct {
	Position   Position
	DriveID    *int64
	Serial     string
	ModelName  string
	HealthBand health.Band
	Enclosure  []byte
}

// SiteView is a site, its areas and every position in them.
type SiteView struct {
	Site      Site
	Areas     []Area
	Positions []PositionVerdict
}

// Site returns a site page's data in four queries: the site, its areas,
// its positions, and the drives standing in them with their enclosure
// reports.
func (s *Store) Site(ctx context.Context, siteID int64) (SiteView, error) {
	var v SiteView
	var err error
	if v.Site, err = Get[Site](ctx, s, siteID); err != nil {
		return v, err
	}
	db := s.db.WithContext(ctx)
	if err := db.Where("site_id = ?", siteID).Order("name").Find(&v.Areas).Error; err != nil {
		return v, fmt.Errorf("areas of site %d: %w", siteID, translate(err))
	}
	var positions []Position
	if err := db.Where("site_id = ?", siteID).Order("tag").Find(&positions).Error; err != nil {
		return v, fmt.Errorf("positions of site %d: %w", siteID, translate(err))
	}
	var drives []struct {
		PositionID int64
		DriveID    int64
		Serial     string
		ModelName  string
		HealthBand *string
		Report     []byte
	}
	// The report is stored as bytes (nothing else looks inside it), so
	// the enclosure part is picked out here.
	err = db.Raw(`SELECT d.position_id, d.id AS drive_id, d.serial, m.name AS model_name, a.health_band, a.report
		FROM drives d JOIN drive_models m ON m.id = d.model_id LEFT JOIN assessments a ON a.drive_id = d.id
		WHERE d.position_id IN (SELECT id FROM positions WHERE site_id = ?)`, siteID).Scan(&drives).Error
	if err != nil {
		return v, fmt.Errorf("drives of site %d: %w", siteID, translate(err))
	}
	at := map[int64]int{}
	v.Positions = make([]PositionVerdict, len(positions))
	for i, p := range positions {
		v.Positions[i].Position = p
		at[p.ID] = i
	}
	for _, d := range drives {
		i, ok := at[d.PositionID]
		if !ok {
			continue
		}
		pv := &v.Positions[i]
		id := d.DriveID
		pv.DriveID, pv.Serial, pv.ModelName = &id, d.Serial, d.ModelName
		if d.HealthBand != nil {
			pv.HealthBand = health.Band(*d.HealthBand)
		}
		if len(d.Report) > 0 {
			var rep struct {
				Enclosure json.RawMessage `json:"enclosure"`
			}
			if err := json.Unmarshal(d.Report, &rep); err != nil {
				return v, fmt.Errorf("report of drive %d: %w", d.DriveID, err)
			}
			if len(rep.Enclosure) > 0 && string(rep.Enclosure) != "null" {
				pv.Enclosure = rep.Enclosure
			}
		}
	}
	return v, nil
}

// StayRow is one installation with the names of both ends: the position
// (tag, area, site) and the drive (serial, model).
type StayRow struct {
	Installation
	PositionTag string
	AreaID      int64
	AreaName    string
	SiteID      int64
	SiteName    string
	Serial      string
	ModelName   string
}

// stays loads installations matching cond with their names, newest first.
func stays(db *gorm.DB, cond string, arg any) ([]StayRow, error) {
	var rows []StayRow
	err := db.Raw(`SELECT i.*, p.tag AS position_tag, ar.id AS area_id, ar.name AS area_name, s.id AS site_id, s.name AS site_name,
			d.serial, m.name AS model_name
		FROM installations i
		JOIN positions p ON p.id = i.position_id
		JOIN areas ar ON ar.id = p.area_id
		JOIN sites s ON s.id = p.site_id
		JOIN drives d ON d.id = i.drive_id
		JOIN drive_models m ON m.id = d.model_id
		WHERE `+cond+` ORDER BY i.installed_at DESC, i.id DESC`, arg).Scan(&rows).Error
	if err != nil {
		return nil, fmt.Errorf("installation history: %w", translate(err))
	}
	return rows, nil
}

// DriveView is a drive with everything its page shows of the register:
// its model, site, where it stands now (or the stores area), its fitted
// components and its installation history.
type DriveView struct {
	Drive      Drive
	Model      DriveModel
	Site       Site
	StoresArea *Area
	// Position is set when the drive stands in a position now.
	Position *PositionContext
	// Capacitor and Fan are the parts fitted now (nil when unknown).
	Capacitor, Fan *Component
	Stays          []StayRow
}

// Drive returns a drive page's register data in a fixed number of
// queries (six or seven, whatever the history's length).
func (s *Store) Drive(ctx context.Context, driveID int64) (DriveView, error) {
	var v DriveView
	var err error
	if v.Drive, err = Get[Drive](ctx, s, driveID); err != nil {
		return v, err
	}
	db := s.db.WithContext(ctx)
	if err := db.Where("id = ?", v.Drive.ModelID).Take(&v.Model).Error; err != nil {
		return v, fmt.Errorf("model of drive %d: %w", driveID, translate(err))
	}
	if err := db.Where("id = ?", v.Drive.SiteID).Take(&v.Site).Error; err != nil {
		return v, fmt.Errorf("site of drive %d: %w", driveID, translate(err))
	}
	if v.Drive.StoresAreaID != nil {
		var a Area
		if err := db.Where("id = ?", *v.Drive.StoresAreaID).Take(&a).Error; err != nil {
			return v, fmt.Errorf("stores area of drive %d: %w", driveID, translate(err))
		}
		v.StoresArea = &a
	}
	if v.Drive.PositionID != nil {
		pc, err := s.positionContext(ctx, *v.Drive.PositionID)
		if err != nil {
			return v, err
		}
		v.Position = &pc
	}
	var comps []Component
	if err := db.Where("drive_id = ? AND removed_at IS NULL", driveID).Order("installed_at").Find(&comps).Error; err != nil {
		return v, fmt.Errorf("components of drive %d: %w", driveID, translate(err))
	}
	for i := range comps {
		switch comps[i].Kind {
		case health.ComponentCapacitors:
			v.Capacitor = &comps[i]
		case health.ComponentFan:
			v.Fan = &comps[i]
		}
	}
	if v.Stays, err = stays(db, "i.drive_id = ?", driveID); err != nil {
		return v, err
	}
	return v, nil
}

// positionContext loads a position with its area and site in one query
// each (the position scoped to the principal's sites).
func (s *Store) positionContext(ctx context.Context, positionID int64) (PositionContext, error) {
	var pc PositionContext
	var err error
	if pc.Position, err = Get[Position](ctx, s, positionID); err != nil {
		return pc, err
	}
	db := s.db.WithContext(ctx)
	if err := db.Where("id = ?", pc.Position.AreaID).Take(&pc.Area).Error; err != nil {
		return pc, fmt.Errorf("area of position %d: %w", positionID, translate(err))
	}
	if err := db.Where("id = ?", pc.Position.SiteID).Take(&pc.Site).Error; err != nil {
		return pc, fmt.Errorf("site of position %d: %w", positionID, translate(err))
	}
	return pc, nil
}

// PositionView is a position with its area and site, the drive standing
// there now (nil when empty) and every drive that stood there.
type PositionView struct {
	PositionContext
	DriveID *int64
	Stays   []StayRow
}

// Position returns a position page's register data in five queries.
func (s *Store) Position(ctx context.Context, positionID int64) (PositionView, error) {
	var v PositionView
	var err error
	if v.PositionContext, err = s.positionContext(ctx, positionID); err != nil {
		return v, err
	}
	db := s.db.WithContext(ctx)
	var ids []int64
	if err := db.Model(&Drive{}).Where("position_id = ?", positionID).Pluck("id", &ids).Error; err != nil {
		return v, fmt.Errorf("drive at position %d: %w", positionID, translate(err))
	}
	if len(ids) > 0 {
		v.DriveID = &ids[0]
	}
	if v.Stays, err = stays(db, "i.position_id = ?", positionID); err != nil {
		return v, err
	}
	return v, nil
}

// ReadingBucket summarises a drive's readings over one interval. Values
// are nil when no reading in the interval logged them.
type ReadingBucket struct {
	Start        time.Time
	N            int64
	AmbientC     *float64
	InternalAirC *float64
	HeatsinkC    *float64
	HeatsinkMaxC *float64
	CurrentA     *float64
	// PeakCurrentA is the highest per-interval peak (or mean current when
	// no peak was logged).
	PeakCurrentA *float64
	BusV         *float64
	BusMinV      *float64
	BusMaxV      *float64
}

// ReadingBuckets summarises a drive's readings in [from, to) into
// intervals of width bucket (at least a minute), oldest first, in one
// query: means of temperatures, current and bus voltage, the highest
// heatsink temperature and peak current, and the bus range. Intervals
// without readings are left out.
func (s *Store) ReadingBuckets(ctx context.Context, driveID int64, from, to time.Time, bucket time.Duration) ([]ReadingBucket, error) {
	var fe fieldErrors
	if bucket < time.Minute {
		fe.add("bucket", "must be at least a minute")
	}
	if !from.Before(to) {
		fe.add("to", "must lie after from")
	}
	if err := fe.err(); err != nil {
		return nil, err
	}
	if _, err := Get[Drive](ctx, s, driveID); err != nil {
		return nil, err
	}
	width := int64(bucket / time.Second)
	idx := "CAST(floor(extract(epoch FROM at) / ?) AS bigint)"
	if s.dialect == SQLite {
		idx = "((at / 1000000) / ?)"
	}
	var rows []struct {
		Idx                                         int64
		N                                           int64
		AmbientC, InternalAirC, HeatsinkC, HsMaxC   *float64
		CurrentA, PeakCurrentA, BusV, BusMin, BusMx *float64
	}
	q := `SELECT ` + idx + ` AS idx, count(*) AS n, avg(ambient_c) AS ambient_c, avg(internal_air_c) AS internal_air_c,
			avg(heatsink_c) AS heatsink_c, max(heatsink_c) AS hs_max_c, avg(current_a) AS current_a,
			max(COALESCE(peak_current_a, current_a)) AS peak_current_a, avg(bus_v) AS bus_v, min(bus_v) AS bus_min, max(bus_v) AS bus_mx
		FROM readings WHERE drive_id = ? AND at >= ? AND at < ? GROUP BY 1 ORDER BY 1`
	err := s.db.WithContext(ctx).Raw(q, width, driveID, s.timeArg(from), s.timeArg(to)).Scan(&rows).Error
	if err != nil {
		return nil, fmt.Errorf("summarise readings of drive %d: %w", driveID, translate(err))
	}
	out := make([]ReadingBucket, len(rows))
	for i, r := range rows {
		out[i] = ReadingBucket{Start: time.Unix(r.Idx*width, 0).UTC(), N: r.N, AmbientC: r.AmbientC, InternalAirC: r.InternalAirC,
			HeatsinkC: r.HeatsinkC, HeatsinkMaxC: r.HsMaxC, CurrentA: r.CurrentA, PeakCurrentA: r.PeakCurrentA,
			BusV: r.BusV, BusMinV: r.BusMin, BusMaxV: r.BusMx}
	}
	return out, nil
}

// FindingsFilter selects findings on the findings page. Zero values do not
// filter; without Status the unresolved findings are listed.
type FindingsFilter struct {
	SiteID   int64
	AreaID   int64
	DriveID  int64
	Kind     health.Kind
	Severity health.Severity
	Status   FindingStatus
	Rule     string
}

// Validate checks the enumerations and sizes of the filter.
func (f FindingsFilter) Validate() error {
	var fe fieldErrors
	if f.Kind != "" && !f.Kind.Valid() {
		fe.add("kind", "must be one of %v", health.Kinds())
	}
	if f.Severity != "" && !f.Severity.Valid() {
		fe.add("severity", "must be one of %v", health.Severities())
	}
	if f.Status != "" && !hasField(enumStrings(FindingStatuses()), string(f.Status)) {
		fe.add("status", "must be one of %v", FindingStatuses())
	}
	fe.text("rule", f.Rule, false, 200)
	return fe.err()
}

// FindingRow is a finding with the names the list shows.
type FindingRow struct {
	Finding
	Serial      string
	PositionTag string
	SiteName    string
	AreaName    string
}

// FindingsView is one page of findings, most severe first, and the number
// that match.
type FindingsView struct {
	Total int64
	Rows  []FindingRow
}

// FindingsList returns one page of findings in two queries (a count and
// the page), most severe first, then most recently seen.
func (s *Store) FindingsList(ctx context.Context, f FindingsFilter, limit, offset int) (FindingsView, error) {
	var v FindingsView
	if err := f.Validate(); err != nil {
		return v, err
	}
	if limit <= 0 || limit > MaxLimit {
		limit = DefaultLimit
	}
	conds := []string{}
	var args []any
	if p := PrincipalFrom(ctx); !p.AllSites() {
		conds = append(conds, "f.site_id IN ?")
		args = append(args, p.Sites)
	}
	add := func(cond string, v any) {
		conds = append(conds, cond)
		args = append(args, v)
	}
	if f.SiteID > 0 {
		add("f.site_id = ?", f.SiteID)
	}
	if f.AreaID > 0 {
		add("f.area_id = ?", f.AreaID)
	}
	if f.DriveID > 0 {
		add("f.drive_id = ?", f.DriveID)
	}
	if f.Kind != "" {
		add("f.kind = ?", f.Kind)
	}
	if f.Severity != "" {
		add("f.severity = ?", f.Severity)
	}
	if f.Rule != "" {
		add("f.rule = ?", f.Rule)
	}
	if f.Status != "" {
		add("f.status = ?", f.Status)
	} else {
		add("f.status <> ?", FindingResolved)
	}
	where := strings.Join(conds, " AND ")
	db := s.db.WithContext(ctx)
	if err := db.Raw("SELECT count(*) FROM findings f WHERE "+where, args...).Scan(&v.Total).Error; err != nil {
		return v, fmt.Errorf("count findings: %w", translate(err))
	}
	q := `SELECT f.*, d.serial, COALESCE(p.tag, '') AS position_tag, s.name AS site_name, COALESCE(ar.name, '') AS area_name
		FROM findings f
		JOIN drives d ON d.id = f.drive_id
		JOIN sites s ON s.id = f.site_id
		LEFT JOIN positions p ON p.id = f.position_id
		LEFT JOIN areas ar ON ar.id = f.area_id
		WHERE ` + where + ` ORDER BY ` + fmt.Sprintf(severityRankSQL, "f.severity") + ` DESC, f.last_seen_at DESC, f.id LIMIT ? OFFSET ?`
	if err := db.Raw(q, append(args, limit, max(offset, 0))...).Scan(&v.Rows).Error; err != nil {
		return v, fmt.Errorf("list findings: %w", translate(err))
	}
	for i := range v.Rows {
		if v.Rows[i].PhysicalWork {
			v.Rows[i].Caution = health.SafetyCaution
		}
	}
	return v, nil
}

// SessionToken loads a token by id for a signed-in page session: it
// answers ErrUnauthenticated when the token does not exist, is revoked or
// has expired, so revoking a token ends its sessions at once. The hash is
// included: the session signature is bound to it.
func (s *Store) SessionToken(ctx context.Context, id int64) (Token, error) {
	var t Token
	err := s.db.WithContext(ctx).Where("id = ?", id).Take(&t).Error
	if errNoRows(err) {
		return Token{}, ErrUnauthenticated
	}
	if err != nil {
		return Token{}, fmt.Errorf("look up token: %w", translate(err))
	}
	if t.RevokedAt != nil || (t.ExpiresAt != nil && !s.now().Before(*t.ExpiresAt)) {
		return Token{}, ErrUnauthenticated
	}
	return t, nil
}

// EndSessions ends every page session the token has opened so far, on
// every replica: a session issued before the token's SessionsAfter is
// refused. Sessions carry their issue time in whole seconds, so the mark is
// the current whole second: a sign-in right after the sign-out is not
// refused, and only a session opened within the same second as the
// sign-out outlives it. The sign-out is audited.
func (s *Store) EndSessions(ctx context.Context, tokenID int64) error {
	return s.tx(ctx, func(tx *gorm.DB) error {
		var t Token
		if err := tx.Where("id = ?", tokenID).Take(&t).Error; err != nil {
			if errNoRows(err) {
				return fmt.Errorf("token %d: %w", tokenID, ErrNotFound)
			}
			return fmt.Errorf("end sessions of token %d: %w", tokenID, translate(err))
		}
		before := t
		after := tx.NowFunc().Truncate(time.Second)
		t.SessionsAfter = &after
		if err := tx.Select("sessions_after", "updated_at").Save(&t).Error; err != nil {
			return fmt.Errorf("end sessions of token %d: %w", tokenID, translate(err))
		}
		return writeAudit(ctx, tx, "sign-out", "tokens", t.ID, &before, &t)
	})
}
