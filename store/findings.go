package store

import (
	"context"
	"encoding/json"
	"fmt"
	"slices"
	"strconv"
	"time"

	"github.com/jackc/pgx/v5"
	"gorm.io/gorm"

	"kelvard/health"
)

// FindingStatus is where a finding is in its life: open when first raised,
// acknowledged by a planner, suppressed by a planner until an expiry, and
// resolved once its condition has cleared for long enough.
type FindingStatus string

// Finding statuses (DESIGN.md section 5).
const (
	FindingOpen         FindingStatus = "open"
	FindingAcknowledged FindingStatus = "acknowledged"
	FindingSuppressed   FindingStatus = "suppressed"
	FindingResolved     FindingStatus = "resolved"
)

// FindingStatuses lists every status.
func FindingStatuses() []FindingStatus {
	return []FindingStatus{FindingOpen, FindingAcknowledged, FindingSuppressed, FindingResolved}
}

// Finding is one rule holding for one drive, with its lifecycle. One
// unresolved finding exists per (drive, rule); resolved ones are history.
type Finding struct {
	ID           int64             `json:"id" gorm:"primaryKey"`
	DriveID      int64             `json:"drive_id"`
	SiteID       int64             `json:"site_id"`
	AreaID       *int64            `json:"area_id"`
	PositionID   *int64            `json:"position_id"`
	Rule         string            `json:"rule"`
	Kind         health.Kind       `json:"kind"`
	Severity     health.Severity   `json:"severity"`
	Status       FindingStatus     `json:"status"`
	Message      string            `json:"message"`
	Evidence     []health.Evidence `json:"evidence" gorm:"serializer:json"`
	Remedy       string            `json:"remedy"`
	PhysicalWork bool              `json:"physical_work"`
	// Caution is health.SafetyCaution when the remedy means physical work.
	Caution         string     `json:"caution,omitempty" gorm:"-"`
	FirstSeenAt     time.Time  `json:"first_seen_at"`
	LastSeenAt      time.Time  `json:"last_seen_at"`
	ClearedAt       *time.Time `json:"cleared_at"`
	ResolvedAt      *time.Time `json:"resolved_at"`
	AcknowledgedAt  *time.Time `json:"acknowledged_at"`
	AcknowledgedBy  string     `json:"acknowledged_by"`
	SuppressedAt    *time.Time `json:"suppressed_at"`
	SuppressedBy    string     `json:"suppressed_by"`
	SuppressedUntil *time.Time `json:"suppressed_until"`
	StatusReason    string     `json:"status_reason"`
	CreatedAt       time.Time  `json:"created_at"`
	UpdatedAt       time.Time  `json:"updated_at"`
}

// Health returns the finding in the models' form.
func (f Finding) Health() health.Finding {
	return health.Finding{Rule: f.Rule, Kind: f.Kind, Severity: f.Severity, Message: f.Message, Evidence: f.Evidence, Remedy: f.Remedy,
		PhysicalWork: f.PhysicalWork}
}

// AfterFind adds the safety caution to findings that propose physical work,
// so every answer that carries such a remedy carries the caution too.
func (f *Finding) AfterFind(*gorm.DB) error {
	if f.PhysicalWork {
		f.Caution = health.SafetyCaution
	}
	return nil
}

// FindingFilters are the query parameters of the findings list.
var findingFilters = []Filter{
	{Param: "site_id", Column: "site_id", Kind: FilterID},
	{Param: "area_id", Column: "area_id", Kind: FilterID},
	{Param: "position_id", Column: "position_id", Kind: FilterID},
	{Param: "drive_id", Column: "drive_id", Kind: FilterID},
	{Param: "rule", Column: "rule", Kind: FilterText},
	{Param: "kind", Column: "kind", Kind: FilterEnum, Values: enumStrings(health.Kinds())},
	{Param: "severity", Column: "severity", Kind: FilterEnum, Values: enumStrings(health.Severities())},
	{Param: "status", Column: "status", Kind: FilterEnum, Values: enumStrings(FindingStatuses())},
}

var findingInfo = &ResourceInfo{Name: "findings", Table: "findings", Filters: findingFilters, scope: "site_id IN ?"}

// FindingsInfo describes the findings list (filters) for the api.
func FindingsInfo() *ResourceInfo { return findingInfo }

// ListFindings returns a page of findings, most severe first within the
// page order by id, honouring the principal's sites. Without a status
// filter it lists the unresolved ones.
func (s *Store) ListFindings(ctx context.Context, lq ListQuery) (Page[Finding], error) {
	after, err := DecodeCursor(lq.Cursor)
	if err != nil {
		return Page[Finding]{}, err
	}
	limit := lq.Limit
	if limit <= 0 {
		limit = DefaultLimit
	}
	if limit > MaxLimit {
		return Page[Finding]{}, Invalid("limit", "must be at most %d", MaxLimit)
	}
	q := scoped(ctx, s.db.WithContext(ctx).Model(&Finding{}), findingInfo)
	if q, err = applyFilters(q, findingInfo, lq.Filters); err != nil {
		return Page[Finding]{}, err
	}
	if lq.Filters["status"] == "" {
		q = q.Where("status <> ?", FindingResolved)
	}
	var items []Finding
	if err := q.Where("id > ?", after).Order("id").Limit(limit + 1).Find(&items).Error; err != nil {
		return Page[Finding]{}, fmt.Errorf("list findings: %w", translate(err))
	}
	page := Page[Finding]{Items: items}
	if len(items) > limit {
		page.Items = items[:limit]
		page.Next = EncodeCursor(page.Items[limit-1].ID)
	}
	return page, nil
}

// GetFinding loads one finding within the principal's sites.
func (s *Store) GetFinding(ctx context.Context, id int64) (Finding, error) {
	var f Finding
	err := scoped(ctx, s.db.WithContext(ctx).Model(&Finding{}), findingInfo).Where("id = ?", id).Take(&f).Error
	if errNoRows(err) {
		return f, fmt.Errorf("finding %d: %w", id, ErrNotFound)
	}
	if err != nil {
		return f, fmt.Errorf("load finding %d: %w", id, translate(err))
	}
	return f, nil
}

// FindingAction is a planner's decision on a finding.
type FindingAction struct {
	// Reason says why; required to suppress.
	Reason string `json:"reason"`
	// Until is when a suppression ends (required to suppress, at most a
	// year ahead).
	Until *time.Time `json:"until"`
}

// AcknowledgeFinding marks an open or suppressed finding acknowledged: a
// planner has seen it and it stays visible and counted.
func (s *Store) AcknowledgeFinding(ctx context.Context, id int64, a FindingAction) (Finding, error) {
	return s.actOnFinding(ctx, id, "acknowledge", func(f *Finding, now time.Time) error {
		var fe fieldErrors
		fe.text("reason", a.Reason, false, 1000)
		if a.Until != nil {
			fe.add("until", "is only for suppressing")
		}
		if err := fe.err(); err != nil {
			return err
		}
		f.Status, f.AcknowledgedAt, f.AcknowledgedBy, f.StatusReason = FindingAcknowledged, &now, PrincipalFrom(ctx).Actor, a.Reason
		f.SuppressedAt, f.SuppressedBy, f.SuppressedUntil = nil, "", nil
		return nil
	})
}

// SuppressFinding hides a finding from risk and from the open lists until
// an expiry, with a reason. When it expires and the condition still holds,
// the next assessment reopens it.
func (s *Store) SuppressFinding(ctx context.Context, id int64, a FindingAction) (Finding, error) {
	return s.actOnFinding(ctx, id, "suppress", func(f *Finding, now time.Time) error {
		var fe fieldErrors
		fe.text("reason", a.Reason, true, 1000)
		switch {
		case a.Until == nil:
			fe.add("until", "is required: a suppression must end")
		case !a.Until.After(now):
			fe.add("until", "must lie in the future")
		case a.Until.After(now.AddDate(1, 0, 1)):
			fe.add("until", "must lie within a year")
		}
		if err := fe.err(); err != nil {
			return err
		}
		until := utc(*a.Until)
		f.Status, f.SuppressedAt, f.SuppressedBy, f.SuppressedUntil, f.StatusReason = FindingSuppressed, &now, PrincipalFrom(ctx).Actor, &until, a.Reason
		return nil
	})
}

func (s *Store) actOnFinding(ctx context.Context, id int64, action string, apply func(*Finding, time.Time) error) (Finding, error) {
	var out Finding
	err := s.tx(ctx, func(tx *gorm.DB) error {
		var f Finding
		err := scoped(ctx, lockRow(tx, s.dialect).Model(&Finding{}), findingInfo).Where("id = ?", id).Take(&f).Error
		if errNoRows(err) {
			return fmt.Errorf("finding %d: %w", id, ErrNotFound)
		}
		if err != nil {
			return translate(err)
		}
		if f.Status == FindingResolved {
			return Invalid("status", "the finding is resolved; only open findings can be acted on")
		}
		before := f
		if err := apply(&f, tx.NowFunc()); err != nil {
			return err
		}
		if err := tx.Save(&f).Error; err != nil {
			return translate(err)
		}
		out = f
		return writeAudit(ctx, tx, action, "findings", f.ID, &before, &f)
	})
	if err != nil {
		return out, fmt.Errorf("%s finding %d: %w", action, id, err)
	}
	return out, nil
}

// FindingUpdate is one drive's findings from an assessment run: the rules
// that hold now and the rules whose checks ran.
type FindingUpdate struct {
	DriveID    int64
	SiteID     int64
	AreaID     *int64
	PositionID *int64
	At         time.Time
	Current    []health.Finding
	Evaluated  []string
}

// reconcileFindings applies one drive's assessment to its findings inside
// the caller's transaction:
//
//   - a rule that holds and has an unresolved finding refreshes it (last
//     seen, severity, message, evidence, position) and clears any cleared
//     mark; a suppression that has expired reopens;
//   - a rule that holds with no unresolved finding opens a new one;
//   - an unresolved finding whose rule was evaluated and no longer holds is
//     marked cleared, and resolved once cleared for resolveAfter;
//   - findings of rules not evaluated are left alone.
//
// existing holds the drive's unresolved findings. It returns the findings
// opened as critical, for notification, and adds to marks the findings
// whose only change is the last-seen time, being cleared or being
// resolved, which the caller writes for a whole batch in a statement per
// kind (findingMarks.write).
func reconcileFindings(tx *gorm.DB, u FindingUpdate, existing []Finding, resolveAfter time.Duration, marks *findingMarks) ([]Finding, error) {
	byRule := map[string]*Finding{}
	for i := range existing {
		byRule[existing[i].Rule] = &existing[i]
	}
	var opened []Finding
	for _, h := range u.Current {
		if f, ok := byRule[h.Rule]; ok {
			delete(byRule, h.Rule)
			changed := f.Severity != h.Severity || f.Message != h.Message || f.ClearedAt != nil || f.PhysicalWork != h.PhysicalWork ||
				!slices.Equal(ptrVal(f.PositionID), ptrVal(u.PositionID)) || !evidenceEqual(f.Evidence, h.Evidence)
			expired := f.Status == FindingSuppressed && f.SuppressedUntil != nil && !u.At.Before(*f.SuppressedUntil)
			if expired {
				f.Status, f.StatusReason = FindingOpen, "suppression expired"
				f.SuppressedAt, f.SuppressedBy, f.SuppressedUntil = nil, "", nil
				changed = true
			}
			f.Severity, f.Message, f.Evidence, f.Remedy, f.Kind, f.PhysicalWork = h.Severity, h.Message, h.Evidence, h.Remedy, h.Kind, h.PhysicalWork
			f.SiteID, f.AreaID, f.PositionID, f.ClearedAt = u.SiteID, u.AreaID, u.PositionID, nil
			f.LastSeenAt = u.At
			switch {
			case expired:
				// Rare: written on its own, and only if still suppressed
				// as loaded.
				if err := reopenExpired(tx, f, u.At); err != nil {
					return nil, err
				}
			case changed:
				marks.changed = append(marks.changed, *f)
			default:
				// Only the last-seen time moved.
				marks.seen = append(marks.seen, f.ID)
			}
			continue
		}
		f := Finding{DriveID: u.DriveID, SiteID: u.SiteID, AreaID: u.AreaID, PositionID: u.PositionID, Rule: h.Rule, Kind: h.Kind,
			Severity: h.Severity, Status: FindingOpen, Message: h.Message, Evidence: h.Evidence, Remedy: h.Remedy,
			PhysicalWork: h.PhysicalWork, FirstSeenAt: u.At, LastSeenAt: u.At}
		if f.Evidence == nil {
			f.Evidence = []health.Evidence{}
		}
		if err := tx.Create(&f).Error; err != nil {
			return nil, fmt.Errorf("open finding %s for drive %d: %w", h.Rule, u.DriveID, translate(err))
		}
		if f.Severity == health.SeverityCritical {
			opened = append(opened, f)
		}
	}
	for rule, f := range byRule {
		if !slices.Contains(u.Evaluated, rule) {
			continue
		}
		switch {
		case f.ClearedAt != nil && u.At.Sub(*f.ClearedAt) >= resolveAfter:
			marks.resolved = append(marks.resolved, f.ID)
		case f.ClearedAt == nil && resolveAfter <= 0:
			marks.resolved = append(marks.resolved, f.ID)
			marks.cleared = append(marks.cleared, f.ID)
		case f.ClearedAt == nil:
			marks.cleared = append(marks.cleared, f.ID)
		}
		// Cleared before and still waiting out resolveAfter: nothing
		// changes.
	}
	return opened, nil
}

// findingMarks are the findings of a batch whose change is one of a few
// kinds, written by write in a statement or two each (a statement per
// finding cost a round trip each).
type findingMarks struct {
	seen     []int64 // held again: last_seen_at moves
	cleared  []int64 // no longer held: cleared_at is set
	resolved []int64 // cleared for long enough: resolved
	// changed are held again with other content (a message that counts
	// the hours of a silence, say); only the columns the assessment owns
	// are written, so an acknowledgement made meanwhile stays.
	changed []Finding
}

// contentValues are the columns an assessment rewrites in a finding that
// still holds, with f's values (the evidence as JSON, as GORM's serializer
// writes it) and now as the update time.
func contentValues(f *Finding, now time.Time) (map[string]any, error) {
	ev, err := json.Marshal(f.Evidence)
	if err != nil {
		return nil, fmt.Errorf("encode evidence of finding %d: %w", f.ID, err)
	}
	return map[string]any{"severity": f.Severity, "message": f.Message, "evidence": string(ev), "remedy": f.Remedy, "kind": f.Kind,
		"physical_work": f.PhysicalWork, "site_id": f.SiteID, "area_id": f.AreaID, "position_id": f.PositionID,
		"cleared_at": nil, "last_seen_at": f.LastSeenAt, "updated_at": now}, nil
}

// reopenExpired writes a finding whose suppression has run out: open
// again, with its new content, unless it changed status meanwhile.
func reopenExpired(tx *gorm.DB, f *Finding, at time.Time) error {
	vals, err := contentValues(f, at)
	if err != nil {
		return err
	}
	vals["status"], vals["status_reason"] = FindingOpen, "suppression expired"
	vals["suppressed_at"], vals["suppressed_by"], vals["suppressed_until"] = nil, "", nil
	if err := tx.Model(&Finding{}).Where("id = ? AND status = ?", f.ID, FindingSuppressed).Updates(vals).Error; err != nil {
		return fmt.Errorf("reopen finding %d: %w", f.ID, translate(err))
	}
	return nil
}

// writeChanged writes the changed findings: on PostgreSQL in one statement
// with the values as arrays (pg is the transaction's connection), on
// SQLite, in process, one statement each.
func (m *findingMarks) writeChanged(ctx context.Context, tx *gorm.DB, pg pgRunner, now time.Time) error {
	if len(m.changed) == 0 {
		return nil
	}
	if pg == nil {
		for i := range m.changed {
			f := &m.changed[i]
			vals, err := contentValues(f, now)
			if err != nil {
				return err
			}
			if err := tx.Model(&Finding{}).Where("id = ?", f.ID).Updates(vals).Error; err != nil {
				return fmt.Errorf("update finding %d: %w", f.ID, translate(err))
			}
		}
		return nil
	}
	n := len(m.changed)
	var (
		ids, sites        = make([]int64, n), make([]int64, n)
		areas, positions  = make([]*int64, n), make([]*int64, n)
		sev, msg, ev, rem = make([]string, n), make([]string, n), make([]string, n), make([]string, n)
		kinds             = make([]string, n)
		physical          = make([]bool, n)
		seen              = make([]time.Time, n)
	)
	for i := range m.changed {
		f := &m.changed[i]
		b, err := json.Marshal(f.Evidence)
		if err != nil {
			return fmt.Errorf("encode evidence of finding %d: %w", f.ID, err)
		}
		ids[i], sites[i], areas[i], positions[i] = f.ID, f.SiteID, f.AreaID, f.PositionID
		sev[i], msg[i], ev[i], rem[i], kinds[i] = string(f.Severity), f.Message, string(b), f.Remedy, string(f.Kind)
		physical[i], seen[i] = f.PhysicalWork, f.LastSeenAt.UTC()
	}
	return pg(func(c *pgx.Conn) error {
		_, err := c.Exec(ctx, `UPDATE findings f SET severity = v.severity, message = v.message, evidence = v.evidence::jsonb,
			remedy = v.remedy, kind = v.kind, physical_work = v.physical_work, site_id = v.site_id, area_id = v.area_id,
			position_id = v.position_id, cleared_at = NULL, last_seen_at = v.last_seen_at, updated_at = $12
			FROM unnest($1::bigint[], $2::text[], $3::text[], $4::text[], $5::text[], $6::text[], $7::boolean[], $8::bigint[],
			            $9::bigint[], $10::bigint[], $11::timestamptz[])
			     AS v(id, severity, message, evidence, remedy, kind, physical_work, site_id, area_id, position_id, last_seen_at)
			WHERE f.id = v.id`,
			ids, sev, msg, ev, rem, kinds, physical, sites, areas, positions, seen, now.UTC())
		if err != nil {
			return fmt.Errorf("update findings: %w", translate(err))
		}
		return nil
	})
}

// write applies the marks as of at.
func (m *findingMarks) write(tx *gorm.DB, at time.Time) error {
	for chunk := range slices.Chunk(m.seen, 500) {
		if err := tx.Model(&Finding{}).Where("id IN ?", chunk).Update("last_seen_at", at).Error; err != nil {
			return fmt.Errorf("refresh findings: %w", translate(err))
		}
	}
	for chunk := range slices.Chunk(m.cleared, 500) {
		if err := tx.Model(&Finding{}).Where("id IN ?", chunk).Update("cleared_at", at).Error; err != nil {
			return fmt.Errorf("clear findings: %w", translate(err))
		}
	}
	for chunk := range slices.Chunk(m.resolved, 500) {
		if err := tx.Model(&Finding{}).Where("id IN ?", chunk).Updates(map[string]any{"status": FindingResolved,
			"resolved_at": at, "status_reason": "condition cleared"}).Error; err != nil {
			return fmt.Errorf("resolve findings: %w", translate(err))
		}
	}
	return nil
}

func ptrVal(p *int64) []int64 {
	if p == nil {
		return nil
	}
	return []int64{*p}
}

func evidenceEqual(a, b []health.Evidence) bool {
	ja, _ := json.Marshal(a)
	jb, _ := json.Marshal(b)
	return string(ja) == string(jb)
}

// ResolveFindingsOf resolves every unresolved finding of a drive (a retired
// drive, say) inside the caller's transaction.
func resolveFindingsOf(tx *gorm.DB, driveID int64, at time.Time, reason string) error {
	err := tx.Model(&Finding{}).Where("drive_id = ? AND status <> ?", driveID, FindingResolved).
		Updates(map[string]any{"status": FindingResolved, "resolved_at": at, "status_reason": reason, "updated_at": at}).Error
	if err != nil {
		return fmt.Errorf("resolve findings of drive %d: %w", driveID, translate(err))
	}
	return nil
}

// FindingCount is the number of unresolved findings of one kind and
// severity at one site, for metrics.
type FindingCount struct {
	SiteID   int64
	SiteName string
	Kind     health.Kind
	Severity health.Severity
	Count    int64
}

// OpenFindingCounts counts open and acknowledged findings (not suppressed,
// not resolved) by site, kind and severity.
func (s *Store) OpenFindingCounts(ctx context.Context) ([]FindingCount, error) {
	var out []FindingCount
	err := s.db.WithContext(ctx).Table("findings f").
		Select("f.site_id, s.name AS site_name, f.kind, f.severity, count(*) AS count").
		Joins("JOIN sites s ON s.id = f.site_id").
		Where("f.status IN ?", []FindingStatus{FindingOpen, FindingAcknowledged}).
		Group("f.site_id, s.name, f.kind, f.severity").Order("f.site_id, f.kind, f.severity").
		Scan(&out).Error
	if err != nil {
		return nil, fmt.Errorf("count findings: %w", translate(err))
	}
	return out, nil
}

func itoa(v int64) string { return strconv.FormatInt(v, 10) }
