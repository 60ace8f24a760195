package store

import (
	"context"
	"fmt"
	"strings"
	"time"

	"kelvard/health"
)

// The read queries behind the work order pages (package web), on the
// same terms as pages.go: a fixed, small number of queries per page, the
// principal's site limit honoured.

// Work order status choices of the list page beyond the statuses
// themselves.
const (
	// OrdersOpen lists proposed, approved and scheduled orders.
	OrdersOpen = "open"
	// OrdersAll lists every order but withdrawn proposals.
	OrdersAll = "all"
)

// WorkOrdersFilter selects work orders on the work orders page. Zero
// values do not filter, except Status: empty lists the open orders.
type WorkOrdersFilter struct {
	SiteID int64
	// Status is a work order status, OrdersOpen or OrdersAll.
	Status string
	// DueWithin keeps orders due within this time of now, overdue ones
	// included.
	DueWithin time.Duration
	// Overdue keeps open orders whose due date has passed.
	Overdue bool
}

// Validate checks the filter's status.
func (f WorkOrdersFilter) Validate() error {
	var fe fieldErrors
	switch f.Status {
	case "", OrdersOpen, OrdersAll:
	default:
		if !hasField(enumStrings(WorkOrderStatuses()), f.Status) {
			fe.add("status", "must be open, all or one of %v", WorkOrderStatuses())
		}
	}
	if f.DueWithin < 0 {
		fe.add("due", "must not be negative")
	}
	return fe.err()
}

// WorkOrderRow is a work order as the list shows it: the order, its site
// and area names, and its active lines counted.
type WorkOrderRow struct {
	WorkOrder
	SiteLabel string
	AreaLabel string
	// ActiveLines and ActiveLabourH count the lines still on the order;
	// Drives the distinct drives they name.
	ActiveLines   int64
	ActiveLabourH float64
	Drives        int64
}

// Overdue reports whether an open order's due date lies before now.
func (r WorkOrderRow) Overdue(now time.Time) bool { return r.Status.Open() && r.DueAt.Before(now) }

// WorkOrdersView is one page of work orders and the number that match.
type WorkOrdersView struct {
	Total int64
	Rows  []WorkOrderRow
}

// WorkOrdersList returns one page of work orders in two queries (a count
// and the page), earliest due first, then most urgent priority.
func (s *Store) WorkOrdersList(ctx context.Context, f WorkOrdersFilter, now time.Time, limit, offset int) (WorkOrdersView, error) {
	var v WorkOrdersView
	if err := f.Validate(); err != nil {
		return v, err
	}
	if limit <= 0 || limit > MaxLimit {
		limit = DefaultLimit
	}
	var conds []string
	var args []any
	add := func(cond string, a ...any) {
		conds = append(conds, cond)
		args = append(args, a...)
	}
	if p := PrincipalFrom(ctx); !p.AllSites() {
		add("o.site_id IN ?", p.Sites)
	}
	if f.SiteID > 0 {
		add("o.site_id = ?", f.SiteID)
	}
	open := []WorkOrderStatus{OrderProposed, OrderApproved, OrderScheduled}
	switch f.Status {
	case "", OrdersOpen:
		add("o.status IN ?", open)
	case OrdersAll:
		add("o.status <> ?", OrderWithdrawn)
	default:
		add("o.status = ?", f.Status)
	}
	if f.DueWithin > 0 {
		add("o.due_at <= ?", now.Add(f.DueWithin).UTC())
	}
	if f.Overdue {
		add("o.due_at < ? AND o.status IN ?", now.UTC(), open)
	}
	where := strings.Join(conds, " AND ")
	db := s.db.WithContext(ctx)
	if err := db.Raw("SELECT count(*) FROM work_orders o WHERE "+where, args...).Scan(&v.Total).Error; err != nil {
		return v, fmt.Errorf("count work orders: %w", translate(err))
	}
	q := `SELECT o.*, s.name AS site_label, COALESCE(ar.name, '') AS area_label,
			COALESCE(l.n, 0) AS active_lines, COALESCE(l.h, 0) AS active_labour_h, COALESCE(l.drives, 0) AS drives
		FROM work_orders o
		JOIN sites s ON s.id = o.site_id
		LEFT JOIN areas ar ON ar.id = o.area_id
		LEFT JOIN (SELECT work_order_id, count(*) AS n, sum(labour_h) AS h, count(DISTINCT drive_id) AS drives
		           FROM work_order_lines WHERE state = 'active' GROUP BY work_order_id) l ON l.work_order_id = o.id
		WHERE ` + where + ` ORDER BY o.due_at, o.priority, o.id LIMIT ? OFFSET ?`
	if err := db.Raw(q, append(args, limit, max(offset, 0))...).Scan(&v.Rows).Error; err != nil {
		return v, fmt.Errorf("list work orders: %w", translate(err))
	}
	for i := range v.Rows {
		r := &v.Rows[i]
		r.DueAt, r.WindowStart, r.WindowEnd = r.DueAt.UTC(), r.WindowStart.UTC(), r.WindowEnd.UTC()
	}
	return v, nil
}

// WorkOrderCounts counts the orders the principal may see by status, and
// the open ones already past their due date, in one query.
type WorkOrderCounts struct {
	ByStatus map[WorkOrderStatus]int64
	Overdue  int64
}

// Open is the number of proposed, approved and scheduled orders.
func (c WorkOrderCounts) Open() int64 {
	return c.ByStatus[OrderProposed] + c.ByStatus[OrderApproved] + c.ByStatus[OrderScheduled]
}

// CountWorkOrders counts the work orders by status in one query.
func (s *Store) CountWorkOrders(ctx context.Context, now time.Time) (WorkOrderCounts, error) {
	out := WorkOrderCounts{ByStatus: map[WorkOrderStatus]int64{}}
	var rows []struct {
		Status  WorkOrderStatus
		N       int64
		Overdue int64
	}
	q := s.db.WithContext(ctx).Table("work_orders").
		Select("status, count(*) AS n, COALESCE(SUM(CASE WHEN due_at < ? THEN 1 ELSE 0 END), 0) AS overdue", now.UTC()).
		Group("status")
	if p := PrincipalFrom(ctx); !p.AllSites() {
		q = q.Where("site_id IN ?", p.Sites)
	}
	if err := q.Scan(&rows).Error; err != nil {
		return out, fmt.Errorf("count work orders: %w", translate(err))
	}
	for _, r := range rows {
		out.ByStatus[r.Status] = r.N
		if r.Status.Open() {
			out.Overdue += r.Overdue
		}
	}
	return out, nil
}

// WorkLinesFilter selects work order lines: those of a drive, or those a
// finding caused (as the line's cause or named among its findings).
type WorkLinesFilter struct {
	DriveID   int64
	FindingID int64
}

// WorkLineRow is a work order line with the state of its order.
type WorkLineRow struct {
	WorkOrderLine
	OrderStatus       WorkOrderStatus
	OrderTitle        string
	OrderDueAt        time.Time
	OrderScheduledFor *time.Time
	OrderDoneAt       *time.Time
}

// WorkLines returns the active lines that match the filter on orders that
// are not withdrawn, open orders first (earliest due first), then the
// others, most recently done first; at most limit rows, in one query.
func (s *Store) WorkLines(ctx context.Context, f WorkLinesFilter, limit int) ([]WorkLineRow, error) {
	if f.DriveID <= 0 && f.FindingID <= 0 {
		return nil, Invalid("drive_id", "name a drive or a finding")
	}
	if limit <= 0 || limit > MaxLimit {
		limit = DefaultLimit
	}
	conds := []string{"l.state = 'active'", "o.status <> 'withdrawn'"}
	var args []any
	if p := PrincipalFrom(ctx); !p.AllSites() {
		conds = append(conds, "o.site_id IN ?")
		args = append(args, p.Sites)
	}
	if f.DriveID > 0 {
		conds = append(conds, "l.drive_id = ?")
		args = append(args, f.DriveID)
	}
	if f.FindingID > 0 {
		// A line caused by several findings of one task names the others
		// in its reason ("Also: finding 12, …").
		conds = append(conds, "(l.finding_id = ? OR l.reason LIKE ?)")
		args = append(args, f.FindingID, fmt.Sprintf("%% finding %d, %%", f.FindingID))
	}
	var rows []WorkLineRow
	q := `SELECT l.*, o.status AS order_status, o.title AS order_title, o.due_at AS order_due_at,
			o.scheduled_for AS order_scheduled_for, o.done_at AS order_done_at
		FROM work_order_lines l JOIN work_orders o ON o.id = l.work_order_id
		WHERE ` + strings.Join(conds, " AND ") + `
		ORDER BY CASE WHEN o.status IN ('proposed', 'approved', 'scheduled') THEN 0 ELSE 1 END,
			CASE WHEN o.status IN ('proposed', 'approved', 'scheduled') THEN o.due_at END,
			COALESCE(o.done_at, o.cancelled_at, o.due_at) DESC, l.id LIMIT ?`
	if err := s.db.WithContext(ctx).Raw(q, append(args, limit)...).Scan(&rows).Error; err != nil {
		return nil, fmt.Errorf("work order lines: %w", translate(err))
	}
	for i := range rows {
		rows[i].TaskTitle = rows[i].Task.Title()
	}
	return rows, nil
}

// OrderSpares returns, for the drive of each active line at a position on
// an open order, the drives in stores at the order's site of the same
// model, by serial: the spares a swap may put in. One query.
func (s *Store) OrderSpares(ctx context.Context, orderID int64) (map[int64][]Drive, error) {
	conds := []string{"l.work_order_id = ?", "l.state = 'active'", "l.position_id IS NOT NULL",
		"o.status IN ('proposed', 'approved', 'scheduled')"}
	args := []any{string(health.StatusInStores), orderID}
	if p := PrincipalFrom(ctx); !p.AllSites() {
		conds = append(conds, "o.site_id IN ?")
		args = append(args, p.Sites)
	}
	var rows []struct {
		ForDrive int64
		Drive
	}
	q := `SELECT DISTINCT l.drive_id AS for_drive, sp.*
		FROM work_order_lines l
		JOIN work_orders o ON o.id = l.work_order_id
		JOIN drives d ON d.id = l.drive_id
		JOIN drives sp ON sp.model_id = d.model_id AND sp.site_id = o.site_id AND sp.status = ?
		WHERE ` + strings.Join(conds, " AND ") + ` ORDER BY sp.serial`
	if err := s.db.WithContext(ctx).Raw(q, args...).Scan(&rows).Error; err != nil {
		return nil, fmt.Errorf("spares of work order %d: %w", orderID, translate(err))
	}
	out := map[int64][]Drive{}
	for _, r := range rows {
		out[r.ForDrive] = append(out[r.ForDrive], r.Drive)
	}
	return out, nil
}
