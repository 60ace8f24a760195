package store

import (
	"context"
	"fmt"
	"slices"
	"strconv"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// WorkOrderStatus is where a work order is in its life: proposed by
// planning (or a planner), approved, scheduled for a date, and then done or
// cancelled. Withdrawn is set by planning alone, on a proposal whose every
// cause has cleared before anyone approved it.
type WorkOrderStatus string

// Work order statuses.
const (
	OrderProposed  WorkOrderStatus = "proposed"
	OrderApproved  WorkOrderStatus = "approved"
	OrderScheduled WorkOrderStatus = "scheduled"
	OrderDone      WorkOrderStatus = "done"
	OrderCancelled WorkOrderStatus = "cancelled"
	OrderWithdrawn WorkOrderStatus = "withdrawn"
)

// WorkOrderStatuses lists every status in lifecycle order.
func WorkOrderStatuses() []WorkOrderStatus {
	return []WorkOrderStatus{OrderProposed, OrderApproved, OrderScheduled, OrderDone, OrderCancelled, OrderWithdrawn}
}

// Open reports whether an order still waits for its work.
func (s WorkOrderStatus) Open() bool {
	return s == OrderProposed || s == OrderApproved || s == OrderScheduled
}

// Work order origins: planning proposed it, or a planner wrote it.
const (
	OriginPlanning = "planning"
	OriginManual   = "manual"
)

// Cause kinds of a work order line.
const (
	CauseFinding   = "finding"
	CauseForecast  = "forecast"
	CauseRecurring = "recurring"
	CauseManual    = "manual"
)

// Line states: active, or withdrawn by planning because its cause cleared
// while its order was still proposed.
const (
	LineActive    = "active"
	LineWithdrawn = "withdrawn"
)

// WorkOrder is one visit's work: lines at one site and area, due in one
// window. Caution is the safety caution every order carries (DESIGN.md
// section 7).
type WorkOrder struct {
	ID           int64           `json:"id" gorm:"primaryKey"`
	SiteID       int64           `json:"site_id"`
	SiteName     string          `json:"site_name" gorm:"-"`
	AreaID       *int64          `json:"area_id"`
	AreaName     string          `json:"area_name" gorm:"-"`
	Status       WorkOrderStatus `json:"status"`
	Origin       string          `json:"origin"`
	Title        string          `json:"title"`
	WindowStart  time.Time       `json:"window_start"`
	WindowEnd    time.Time       `json:"window_end"`
	DueAt        time.Time       `json:"due_at"`
	Priority     int             `json:"priority"`
	RiskScore    float64         `json:"risk_score"`
	ScheduledFor *time.Time      `json:"scheduled_for"`
	ExternalRef  string          `json:"external_ref"`
	Notes        string          `json:"notes"`
	StatusReason string          `json:"status_reason"`
	ProposedAt   time.Time       `json:"proposed_at"`
	ProposedBy   string          `json:"proposed_by"`
	ApprovedAt   *time.Time      `json:"approved_at"`
	ApprovedBy   string          `json:"approved_by"`
	ScheduledAt  *time.Time      `json:"scheduled_at"`
	ScheduledBy  string          `json:"scheduled_by"`
	DoneAt       *time.Time      `json:"done_at"`
	DoneBy       string          `json:"done_by"`
	CancelledAt  *time.Time      `json:"cancelled_at"`
	CancelledBy  string          `json:"cancelled_by"`
	WithdrawnAt  *time.Time      `json:"withdrawn_at"`
	// LabourH is the lines' estimated labour, summed over active lines.
	LabourH   float64         `json:"labour_h" gorm:"-"`
	Lines     []WorkOrderLine `json:"lines" gorm:"-"`
	Caution   string          `json:"caution" gorm:"-"`
	CreatedAt time.Time       `json:"created_at"`
	UpdatedAt time.Time       `json:"updated_at"`
}

// WorkOrderLine is one task on one drive, with the cause it came from and,
// once the order is done, what was found and done.
type WorkOrderLine struct {
	ID          int64    `json:"id" gorm:"primaryKey"`
	WorkOrderID int64    `json:"work_order_id"`
	DriveID     int64    `json:"drive_id"`
	DriveSerial string   `json:"drive_serial" gorm:"-"`
	PositionID  *int64   `json:"position_id"`
	PositionTag string   `json:"position_tag" gorm:"-"`
	Task        WorkTask `json:"task"`
	TaskTitle   string   `json:"task_title" gorm:"-"`
	Parts       string   `json:"parts"`
	LabourH     float64  `json:"labour_h"`
	// Reason says what the line came from: the finding or forecast item.
	Reason string `json:"reason"`
	// CauseKind is finding, forecast, recurring or manual; CauseKey names
	// the cause ("finding:42", "forecast:dc_bus_capacitors:17" …) and is
	// how planning recognises a line it has proposed before.
	CauseKind string    `json:"cause_kind"`
	CauseKey  string    `json:"cause_key"`
	FindingID *int64    `json:"finding_id"`
	DueAt     time.Time `json:"due_at"`
	RiskScore float64   `json:"risk_score"`
	Priority  int       `json:"priority"`
	State     string    `json:"state"`
	// WithdrawnAt is set when planning withdrew the line; CauseClearedAt
	// when its cause cleared after the order was approved (the line stays).
	WithdrawnAt    *time.Time `json:"withdrawn_at"`
	CauseClearedAt *time.Time `json:"cause_cleared_at"`
	// Completion: outcome done or not_done, the action taken, what was
	// found, the spare swapped in and the component fitted.
	Outcome            string             `json:"outcome"`
	Action             WorkAction         `json:"action"`
	FoundFailureMode   health.FailureMode `json:"found_failure_mode"`
	FoundCapacitanceUF *float64           `json:"found_capacitance_uf" gorm:"column:found_capacitance_uf"`
	FoundESRMilliohm   *float64           `json:"found_esr_milliohm" gorm:"column:found_esr_milliohm"`
	SwapDriveID        *int64             `json:"swap_drive_id"`
	NewComponentID     *int64             `json:"new_component_id"`
	CompletionNotes    string             `json:"completion_notes"`
	CreatedAt          time.Time          `json:"created_at"`
	UpdatedAt          time.Time          `json:"updated_at"`
}

// TableName names the lines table.
func (WorkOrderLine) TableName() string { return "work_order_lines" }

var workOrderFilters = []Filter{
	{Param: "site_id", Column: "site_id", Kind: FilterID},
	{Param: "area_id", Column: "area_id", Kind: FilterID},
	{Param: "status", Column: "status", Kind: FilterEnum, Values: enumStrings(WorkOrderStatuses())},
	{Param: "due_from", Column: "due_at", Kind: FilterFrom},
	{Param: "due_to", Column: "due_at", Kind: FilterTo},
	{Param: "external_ref", Column: "external_ref", Kind: FilterText},
}

var workOrderInfo = &ResourceInfo{Name: "work-orders", Table: "work_orders", Filters: workOrderFilters, scope: "site_id IN ?"}

// WorkOrdersInfo describes the work order list (filters) for the api.
func WorkOrdersInfo() *ResourceInfo { return workOrderInfo }

// ListWorkOrders returns a page of work orders with their lines, by id,
// honouring the principal's sites. Without a status filter it lists every
// order except withdrawn proposals; "open" in Filters["status"] lists
// proposed, approved and scheduled ones.
func (s *Store) ListWorkOrders(ctx context.Context, lq ListQuery) (Page[WorkOrder], error) {
	after, err := DecodeCursor(lq.Cursor)
	if err != nil {
		return Page[WorkOrder]{}, err
	}
	limit := lq.Limit
	if limit <= 0 {
		limit = DefaultLimit
	}
	if limit > MaxLimit {
		return Page[WorkOrder]{}, Invalid("limit", "must be at most %d", MaxLimit)
	}
	filters := lq.Filters
	open := filters["status"] == "open"
	if open {
		filters = maps2(filters, "status")
	}
	db := s.db.WithContext(ctx)
	q := scoped(ctx, db.Model(&WorkOrder{}), workOrderInfo)
	if q, err = applyFilters(q, workOrderInfo, filters); err != nil {
		return Page[WorkOrder]{}, err
	}
	switch {
	case open:
		q = q.Where("status IN ?", []WorkOrderStatus{OrderProposed, OrderApproved, OrderScheduled})
	case filters["status"] == "":
		q = q.Where("status <> ?", OrderWithdrawn)
	}
	if v := filters["drive_id"]; v != "" {
		id, err := strconv.ParseInt(v, 10, 64)
		if err != nil || id <= 0 {
			return Page[WorkOrder]{}, Invalid("drive_id", "must be a positive integer id")
		}
		q = q.Where("id IN (SELECT work_order_id FROM work_order_lines WHERE drive_id = ?)", id)
	}
	var items []WorkOrder
	if err := q.Where("id > ?", after).Order("id").Limit(limit + 1).Find(&items).Error; err != nil {
		return Page[WorkOrder]{}, fmt.Errorf("list work orders: %w", translate(err))
	}
	page := Page[WorkOrder]{Items: items}
	if len(items) > limit {
		page.Items = items[:limit]
		page.Next = EncodeCursor(page.Items[limit-1].ID)
	}
	if err := fillWorkOrders(db, page.Items); err != nil {
		return Page[WorkOrder]{}, err
	}
	return page, nil
}

// AllWorkOrders returns every order the list query selects, following the
// pages, for exports.
func (s *Store) AllWorkOrders(ctx context.Context, filters map[string]string) ([]WorkOrder, error) {
	var out []WorkOrder
	lq := ListQuery{Filters: filters, Limit: MaxLimit}
	for {
		page, err := s.ListWorkOrders(ctx, lq)
		if err != nil {
			return nil, err
		}
		out = append(out, page.Items...)
		if page.Next == "" {
			return out, nil
		}
		lq.Cursor = page.Next
	}
}

// maps2 copies m without the key.
func maps2(m map[string]string, without string) map[string]string {
	out := make(map[string]string, len(m))
	for k, v := range m {
		if k != without {
			out[k] = v
		}
	}
	return out
}

// GetWorkOrder loads one work order with its lines, within the principal's
// sites.
func (s *Store) GetWorkOrder(ctx context.Context, id int64) (WorkOrder, error) {
	return getWorkOrder(ctx, s.db.WithContext(ctx), id)
}

func getWorkOrder(ctx context.Context, db *gorm.DB, id int64) (WorkOrder, error) {
	var o WorkOrder
	err := scoped(ctx, db.Model(&WorkOrder{}), workOrderInfo).Where("id = ?", id).Take(&o).Error
	if errNoRows(err) {
		return o, fmt.Errorf("work order %d: %w", id, ErrNotFound)
	}
	if err != nil {
		return o, fmt.Errorf("load work order %d: %w", id, translate(err))
	}
	orders := []WorkOrder{o}
	if err := fillWorkOrders(db, orders); err != nil {
		return o, err
	}
	return orders[0], nil
}

// fillWorkOrders loads the lines of the orders and the names the answers
// show (site, area, position tag, drive serial), with a fixed number of
// queries.
func fillWorkOrders(db *gorm.DB, orders []WorkOrder) error {
	if len(orders) == 0 {
		return nil
	}
	ids := make([]int64, len(orders))
	var siteIDs, areaIDs []int64
	for i, o := range orders {
		ids[i] = o.ID
		siteIDs = append(siteIDs, o.SiteID)
		if o.AreaID != nil {
			areaIDs = append(areaIDs, *o.AreaID)
		}
	}
	var lines []WorkOrderLine
	if err := db.Where("work_order_id IN ?", ids).Order("work_order_id, id").Find(&lines).Error; err != nil {
		return fmt.Errorf("load work order lines: %w", translate(err))
	}
	var driveIDs, posIDs []int64
	for _, l := range lines {
		driveIDs = append(driveIDs, l.DriveID)
		if l.PositionID != nil {
			posIDs = append(posIDs, *l.PositionID)
		}
	}
	sites, err := byID[Site](db, siteIDs)
	if err != nil {
		return err
	}
	areas, err := byID[Area](db, areaIDs)
	if err != nil {
		return err
	}
	drives, err := byID[Drive](db, driveIDs)
	if err != nil {
		return err
	}
	positions, err := byID[Position](db, posIDs)
	if err != nil {
		return err
	}
	byOrder := map[int64][]WorkOrderLine{}
	for _, l := range lines {
		l.DriveSerial = drives[l.DriveID].Serial
		if l.PositionID != nil {
			l.PositionTag = positions[*l.PositionID].Tag
		}
		l.TaskTitle = l.Task.Title()
		byOrder[l.WorkOrderID] = append(byOrder[l.WorkOrderID], l)
	}
	for i := range orders {
		o := &orders[i]
		o.SiteName = sites[o.SiteID].Name
		if o.AreaID != nil {
			o.AreaName = areas[*o.AreaID].Name
		}
		o.Lines = byOrder[o.ID]
		if o.Lines == nil {
			o.Lines = []WorkOrderLine{}
		}
		o.LabourH = 0
		for _, l := range o.Lines {
			if l.State == LineActive {
				o.LabourH += l.LabourH
			}
		}
		o.Caution = health.SafetyCaution
	}
	return nil
}

// PriorityFor maps a risk score to an RFC 5545 PRIORITY (section 3.8.1.9:
// 1 highest, 1 to 4 high, 5 medium, 6 to 9 low): urgent band 1, plan 3,
// watch 5, sound 7 (health.BandFor gives the band).
func PriorityFor(risk float64) int {
	switch health.BandFor(risk) {
	case health.BandUrgent:
		return 1
	case health.BandPlan:
		return 3
	case health.BandWatch:
		return 5
	}
	return 7
}

// summarise recomputes an order's due date, priority and risk from its
// active lines (all lines when none is active).
func (o *WorkOrder) summarise(lines []WorkOrderLine) {
	act := slices.DeleteFunc(slices.Clone(lines), func(l WorkOrderLine) bool { return l.State != LineActive })
	if len(act) == 0 {
		act = lines
	}
	if len(act) == 0 {
		return
	}
	o.DueAt, o.Priority, o.RiskScore = act[0].DueAt, act[0].Priority, act[0].RiskScore
	for _, l := range act[1:] {
		if l.DueAt.Before(o.DueAt) {
			o.DueAt = l.DueAt
		}
		o.Priority = min(o.Priority, l.Priority)
		o.RiskScore = max(o.RiskScore, l.RiskScore)
	}
}

// MonthWindow returns the calendar month (UTC) holding t: the due window
// work orders are grouped in.
func MonthWindow(t time.Time) (start, end time.Time) {
	t = t.UTC()
	start = time.Date(t.Year(), t.Month(), 1, 0, 0, 0, 0, time.UTC)
	return start, start.AddDate(0, 1, 0)
}
