package store

import (
	"cmp"
	"context"
	"fmt"
	"slices"
	"strings"
	"time"

	"gorm.io/gorm"
)

// ProposedLine is one line planning wants on a work order: a task on a
// drive, from one cause, due by a time, grouped into the order of its site,
// area and due window.
type ProposedLine struct {
	SiteID     int64
	AreaID     *int64
	DriveID    int64
	PositionID *int64
	Task       WorkTask
	Parts      string
	LabourH    float64
	Reason     string
	// CauseKind is finding, forecast or recurring; CauseKey names the
	// cause uniquely ("finding:42").
	CauseKind string
	CauseKey  string
	FindingID *int64
	DueAt     time.Time
	RiskScore float64
	// WindowStart and WindowEnd are the due window the line is grouped
	// in: lines of one site, area and window share an order.
	WindowStart, WindowEnd time.Time
}

// SyncOptions tune SyncProposals.
type SyncOptions struct {
	// At is the planning run's time.
	At time.Time
	// Kinds are the cause kinds the run evaluated: a line of one of these
	// kinds whose cause is not among the proposals has cleared.
	Kinds []string
	// RedoAfter is how long after an order with a cause is done or
	// cancelled the same cause may be proposed again (default 30 days):
	// the next assessment needs time to see that the work cleared it.
	RedoAfter time.Duration
}

// SyncResult counts what a planning run changed.
type SyncResult struct {
	// Proposed lines were added; Refreshed lines had their due date or
	// risk updated; Withdrawn lines left a proposed order because their
	// cause cleared; CauseCleared lines stay on an approved order, noted.
	Proposed, Refreshed, Withdrawn, CauseCleared int
	// Duplicates are proposals skipped because a live line already does
	// the same task on the same drive for another cause.
	Duplicates int
	// OrdersCreated and OrdersWithdrawn count whole orders.
	OrdersCreated, OrdersWithdrawn int
}

// planningLockKey is the PostgreSQL advisory lock key of SyncProposals
// ("kelvard plan" in ASCII, so it cannot meet another lock of kelvard's
// by chance).
const planningLockKey int64 = 0x6b656c7661726470

// lineWithOrder is a line and the state of its order.
type lineWithOrder struct {
	WorkOrderLine
	OrderStatus      WorkOrderStatus
	OrderDoneAt      *time.Time
	OrderCancelledAt *time.Time
}

// causeRank orders proposals of the same task on the same drive: a finding
// is the most specific cause, then the forecast, then the calendar.
func causeRank(kind string) int {
	switch kind {
	case CauseFinding:
		return 0
	case CauseForecast:
		return 1
	case CauseRecurring:
		return 2
	}
	return 3
}

// SyncProposals brings the proposed work orders in line with what planning
// proposes now, in one transaction:
//
//   - a proposal whose cause already has a line on an open order, or on an
//     order done or cancelled within RedoAfter, is not proposed again; nor
//     is a proposal whose task already has a live line on the same drive
//     (the line of the more specific cause wins: finding, then forecast,
//     then recurring);
//   - a new proposal joins the proposed order of its site, area and due
//     window, or opens one;
//   - a line of an evaluated kind whose cause is gone is withdrawn while its
//     order is proposed, and an order left with no active line is
//     withdrawn; on an approved or scheduled order the line stays and its
//     cause_cleared_at is set (and cleared again if the cause returns);
//   - lines still proposed take the latest due date and risk.
//
// Orders are audited under the context's principal.
func (s *Store) SyncProposals(ctx context.Context, proposals []ProposedLine, opt SyncOptions) (SyncResult, error) {
	if opt.RedoAfter <= 0 {
		opt.RedoAfter = 30 * 24 * time.Hour
	}
	at := utc(opt.At)
	var res SyncResult
	err := s.tx(ctx, func(tx *gorm.DB) error {
		res = SyncResult{}
		if s.dialect == Postgres {
			// One planning run at a time, and no approval slipping in
			// between reading an open order's lines and withdrawing them:
			// a change to an order takes the same row locks.
			if err := tx.Exec("SELECT pg_advisory_xact_lock(?)", planningLockKey).Error; err != nil {
				return fmt.Errorf("take the planning lock: %w", translate(err))
			}
			var ids []int64
			if err := tx.Clauses(forUpdate).Model(&WorkOrder{}).Where("status IN ?",
				[]WorkOrderStatus{OrderProposed, OrderApproved, OrderScheduled}).Order("id").Pluck("id", &ids).Error; err != nil {
				return fmt.Errorf("lock open work orders: %w", translate(err))
			}
		}
		return syncProposals(ctx, tx, proposals, opt, at, &res)
	})
	if err != nil {
		return SyncResult{}, fmt.Errorf("sync work order proposals: %w", err)
	}
	return res, nil
}

func syncProposals(ctx context.Context, tx *gorm.DB, proposals []ProposedLine, opt SyncOptions, at time.Time, res *SyncResult) error {
	var lines []lineWithOrder
	err := tx.Table("work_order_lines l").
		Select("l.*, o.status AS order_status, o.done_at AS order_done_at, o.cancelled_at AS order_cancelled_at").
		Joins("JOIN work_orders o ON o.id = l.work_order_id").
		Where("o.status IN ? OR o.done_at >= ? OR o.cancelled_at >= ?",
			[]WorkOrderStatus{OrderProposed, OrderApproved, OrderScheduled}, at.Add(-opt.RedoAfter), at.Add(-opt.RedoAfter)).
		Order("l.id").Scan(&lines).Error
	if err != nil {
		return fmt.Errorf("load lines: %w", translate(err))
	}
	byKey := make(map[string]*ProposedLine, len(proposals))
	for i := range proposals {
		p := &proposals[i]
		if p.CauseKey == "" || !slices.Contains(opt.Kinds, p.CauseKind) {
			return fmt.Errorf("proposal %q of kind %q is not of an evaluated kind", p.CauseKey, p.CauseKind)
		}
		byKey[p.CauseKey] = p
	}
	type driveTask struct {
		drive int64
		task  WorkTask
	}
	covered := map[string]bool{}
	live := map[driveTask]bool{}
	touched := map[int64]bool{}
	for i := range lines {
		l := &lines[i]
		if l.State != LineActive {
			continue
		}
		if !l.OrderStatus.Open() {
			covered[l.CauseKey] = true // done or cancelled recently
			continue
		}
		p, ok := byKey[l.CauseKey]
		managed := slices.Contains(opt.Kinds, l.CauseKind)
		switch {
		case l.OrderStatus == OrderProposed && managed && !ok:
			t := at
			l.State, l.WithdrawnAt = LineWithdrawn, &t
			if err := tx.Select("state", "withdrawn_at", "updated_at").Save(&l.WorkOrderLine).Error; err != nil {
				return fmt.Errorf("withdraw line %d: %w", l.ID, translate(err))
			}
			res.Withdrawn++
			touched[l.WorkOrderID] = true
			continue
		case l.OrderStatus == OrderProposed && ok:
			due, risk := utc(p.DueAt), p.RiskScore
			if !due.Equal(l.DueAt) || risk != l.RiskScore || p.Reason != l.Reason {
				l.DueAt, l.RiskScore, l.Priority, l.Reason = due, risk, PriorityFor(risk), p.Reason
				if err := tx.Select("due_at", "risk_score", "priority", "reason", "updated_at").Save(&l.WorkOrderLine).Error; err != nil {
					return fmt.Errorf("refresh line %d: %w", l.ID, translate(err))
				}
				res.Refreshed++
				touched[l.WorkOrderID] = true
			}
		case managed && !ok && l.CauseClearedAt == nil:
			t := at
			l.CauseClearedAt = &t
			if err := tx.Select("cause_cleared_at", "updated_at").Save(&l.WorkOrderLine).Error; err != nil {
				return fmt.Errorf("note line %d cleared: %w", l.ID, translate(err))
			}
			res.CauseCleared++
			touched[l.WorkOrderID] = true
		case ok && l.CauseClearedAt != nil:
			l.CauseClearedAt = nil
			if err := tx.Select("cause_cleared_at", "updated_at").Save(&l.WorkOrderLine).Error; err != nil {
				return fmt.Errorf("note line %d cause back: %w", l.ID, translate(err))
			}
			touched[l.WorkOrderID] = true
		}
		covered[l.CauseKey] = true
		live[driveTask{l.DriveID, l.Task}] = true
	}

	// Proposed orders open for new lines, by site, area and window.
	type group struct {
		site  int64
		area  int64
		start int64
	}
	keyOf := func(site int64, area *int64, start time.Time) group {
		g := group{site: site, start: start.Unix()}
		if area != nil {
			g.area = *area
		}
		return g
	}
	var proposed []WorkOrder
	if err := tx.Where("status = ?", OrderProposed).Order("id").Find(&proposed).Error; err != nil {
		return fmt.Errorf("load proposed orders: %w", translate(err))
	}
	openOrder := map[group]int64{}
	for _, o := range proposed {
		if o.Origin == OriginPlanning {
			if _, seen := openOrder[keyOf(o.SiteID, o.AreaID, o.WindowStart)]; !seen {
				openOrder[keyOf(o.SiteID, o.AreaID, o.WindowStart)] = o.ID
			}
		}
	}

	order := slices.Clone(proposals)
	slices.SortStableFunc(order, func(a, b ProposedLine) int {
		if c := cmp.Compare(causeRank(a.CauseKind), causeRank(b.CauseKind)); c != 0 {
			return c
		}
		if c := a.DueAt.Compare(b.DueAt); c != 0 {
			return c
		}
		return strings.Compare(a.CauseKey, b.CauseKey)
	})
	var created []int64
	for _, p := range order {
		if covered[p.CauseKey] {
			continue
		}
		if live[driveTask{p.DriveID, p.Task}] {
			res.Duplicates++
			continue
		}
		if !p.Task.Valid() {
			return fmt.Errorf("proposal %s: unknown task %q", p.CauseKey, p.Task)
		}
		covered[p.CauseKey] = true
		live[driveTask{p.DriveID, p.Task}] = true
		g := keyOf(p.SiteID, p.AreaID, p.WindowStart)
		oid, ok := openOrder[g]
		if !ok {
			o := WorkOrder{SiteID: p.SiteID, AreaID: p.AreaID, Status: OrderProposed, Origin: OriginPlanning, Title: "work order",
				WindowStart: utc(p.WindowStart), WindowEnd: utc(p.WindowEnd), DueAt: utc(p.DueAt), Priority: PriorityFor(p.RiskScore),
				RiskScore: p.RiskScore, ProposedAt: at, ProposedBy: PrincipalFrom(ctx).Actor}
			if err := tx.Create(&o).Error; err != nil {
				return fmt.Errorf("open work order: %w", translate(err))
			}
			oid = o.ID
			openOrder[g] = oid
			created = append(created, oid)
			res.OrdersCreated++
		}
		l := WorkOrderLine{WorkOrderID: oid, DriveID: p.DriveID, PositionID: p.PositionID, Task: p.Task, Parts: p.Parts,
			LabourH: p.LabourH, Reason: p.Reason, CauseKind: p.CauseKind, CauseKey: p.CauseKey, FindingID: p.FindingID,
			DueAt: utc(p.DueAt), RiskScore: p.RiskScore, Priority: PriorityFor(p.RiskScore), State: LineActive}
		if err := tx.Create(&l).Error; err != nil {
			return fmt.Errorf("add line %s: %w", p.CauseKey, translate(err))
		}
		res.Proposed++
		touched[oid] = true
	}

	ids := make([]int64, 0, len(touched))
	for id := range touched {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	for _, id := range ids {
		action := "plan"
		if slices.Contains(created, id) {
			action = "propose"
		}
		if err := resummarise(ctx, tx, id, at, action, res); err != nil {
			return err
		}
	}
	return nil
}

// resummarise recomputes an order's due date, priority, risk and title from
// its lines, withdraws a proposed order left without an active line, and
// audits the change.
func resummarise(ctx context.Context, tx *gorm.DB, id int64, at time.Time, action string, res *SyncResult) error {
	var o WorkOrder
	if err := tx.Where("id = ?", id).Take(&o).Error; err != nil {
		return fmt.Errorf("load work order %d: %w", id, translate(err))
	}
	var before *WorkOrder
	if action != "propose" {
		b := o
		before = &b
	}
	var lines []WorkOrderLine
	if err := tx.Where("work_order_id = ?", id).Order("id").Find(&lines).Error; err != nil {
		return fmt.Errorf("load lines of work order %d: %w", id, translate(err))
	}
	o.summarise(lines)
	active := 0
	for _, l := range lines {
		if l.State == LineActive {
			active++
		}
	}
	if o.Status == OrderProposed && active == 0 {
		t := at
		o.Status, o.WithdrawnAt, o.StatusReason = OrderWithdrawn, &t, "withdrawn by planning: every cause cleared"
		action = "withdraw"
		res.OrdersWithdrawn++
	}
	title, err := orderTitle(tx, o, active)
	if err != nil {
		return err
	}
	o.Title = title
	if err := tx.Save(&o).Error; err != nil {
		return fmt.Errorf("save work order %d: %w", id, translate(err))
	}
	after := []WorkOrder{o}
	if err := fillWorkOrders(tx, after); err != nil {
		return err
	}
	return writeAudit(ctx, tx, action, "work-orders", id, before, &after[0])
}

// orderTitle names an order by where and when: "Pump hall A, Works A: 3
// tasks due 2026-12".
func orderTitle(tx *gorm.DB, o WorkOrder, tasks int) (string, error) {
	var site Site
	if err := tx.Select("id, name").Where("id = ?", o.SiteID).Take(&site).Error; err != nil {
		return "", fmt.Errorf("name site %d: %w", o.SiteID, translate(err))
	}
	where := site.Name
	if o.AreaID != nil {
		var a Area
		if err := tx.Select("id, name").Where("id = ?", *o.AreaID).Take(&a).Error; err != nil {
			return "", fmt.Errorf("name area %d: %w", *o.AreaID, translate(err))
		}
		where = a.Name + ", " + site.Name
	}
	noun := "tasks"
	if tasks == 1 {
		noun = "task"
	}
	return fmt.Sprintf("%s: %d %s due %s", where, tasks, noun, o.WindowStart.Format("2006-01")), nil
}
