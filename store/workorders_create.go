package store

import (
	"context"
	"fmt"
	"strings"
	"time"

	"gorm.io/gorm"
)

// NewWorkOrder is a work order a planner writes by hand: lines on drives of
// one site, due by DueAt (default 30 days ahead).
type NewWorkOrder struct {
	Lines       []NewWorkOrderLine `json:"lines"`
	DueAt       *time.Time         `json:"due_at"`
	ExternalRef string             `json:"external_ref"`
	Notes       string             `json:"notes"`
}

// NewWorkOrderLine is one task of a hand-written order.
type NewWorkOrderLine struct {
	DriveID int64    `json:"drive_id"`
	Task    WorkTask `json:"task"`
	Reason  string   `json:"reason"`
	Parts   string   `json:"parts"`
	LabourH float64  `json:"labour_h"`
}

// CreateWorkOrder writes a hand-made order, proposed, in one transaction:
// its site is the drives' site (all lines must share it), its area the one
// they share (their position's, or their stores area), its due window the
// month of DueAt, and each line's priority comes from the drive's latest
// risk score.
func (s *Store) CreateWorkOrder(ctx context.Context, n NewWorkOrder) (WorkOrder, error) {
	var out WorkOrder
	err := s.tx(ctx, func(tx *gorm.DB) error {
		now := utc(tx.NowFunc())
		var fe fieldErrors
		if len(n.Lines) == 0 {
			fe.add("lines", "name at least one line")
		}
		if len(n.Lines) > 500 {
			fe.add("lines", "at most 500 lines")
		}
		due := now.AddDate(0, 0, 30)
		if n.DueAt != nil {
			due = utc(*n.DueAt)
			if due.Before(now.AddDate(-1, 0, 0)) || due.After(now.AddDate(5, 0, 0)) {
				fe.add("due_at", "must lie between a year ago and five years ahead")
			}
		}
		ref := strings.TrimSpace(n.ExternalRef)
		fe.text("external_ref", ref, false, 100)
		fe.text("notes", n.Notes, false, 4000)
		var site int64
		var area *int64
		areaSet := false
		lines := make([]WorkOrderLine, 0, len(n.Lines))
		for i, nl := range n.Lines {
			f := fmt.Sprintf("lines[%d].", i)
			if !nl.Task.Valid() {
				fe.add(f+"task", "must be one of %v", WorkTasks())
			}
			fe.text(f+"reason", nl.Reason, true, 1000)
			fe.text(f+"parts", nl.Parts, false, 400)
			fe.rangeCheck(f+"labour_h", nl.LabourH, 0, 1000)
			d, err := get[Drive](ctx, tx, nl.DriveID)
			if IsNotFound(err) {
				fe.add(f+"drive_id", "no drive with id %d", nl.DriveID)
				continue
			} else if err != nil {
				return err
			}
			if site == 0 {
				site = d.SiteID
			} else if d.SiteID != site {
				fe.add(f+"drive_id", "drive %s is at site %d; every line of an order must be at site %d", d.Serial, d.SiteID, site)
			}
			a := d.StoresAreaID
			if d.PositionID != nil {
				var p Position
				if err := tx.Select("id, area_id").Where("id = ?", *d.PositionID).Take(&p).Error; err != nil {
					return fmt.Errorf("load position %d: %w", *d.PositionID, translate(err))
				}
				a = &p.AreaID
			}
			switch {
			case !areaSet:
				area, areaSet = a, true
			case area != nil && (a == nil || *a != *area):
				area = nil
			}
			var risk float64
			if err := tx.Table("assessments").Select("risk_score").Where("drive_id = ?", d.ID).Scan(&risk).Error; err != nil {
				return fmt.Errorf("load risk of drive %d: %w", d.ID, translate(err))
			}
			lines = append(lines, WorkOrderLine{DriveID: d.ID, PositionID: d.PositionID, Task: nl.Task, Parts: nl.Parts,
				LabourH: nl.LabourH, Reason: nl.Reason, CauseKind: CauseManual, DueAt: due, RiskScore: risk,
				Priority: PriorityFor(risk), State: LineActive})
		}
		if err := fe.err(); err != nil {
			return err
		}
		start, end := MonthWindow(due)
		o := WorkOrder{SiteID: site, AreaID: area, Status: OrderProposed, Origin: OriginManual, Title: "work order",
			WindowStart: start, WindowEnd: end, ExternalRef: ref, Notes: n.Notes, ProposedAt: now, ProposedBy: PrincipalFrom(ctx).Actor}
		o.summarise(lines)
		if err := tx.Create(&o).Error; err != nil {
			return translate(err)
		}
		for i := range lines {
			lines[i].WorkOrderID = o.ID
			lines[i].CauseKey = fmt.Sprintf("manual:%d:%d", o.ID, i+1)
		}
		if err := tx.Create(&lines).Error; err != nil {
			return fmt.Errorf("add lines: %w", translate(err))
		}
		title, err := orderTitle(tx, o, len(lines))
		if err != nil {
			return err
		}
		o.Title = title
		if err := tx.Select("title", "updated_at").Save(&o).Error; err != nil {
			return translate(err)
		}
		after := []WorkOrder{o}
		if err := fillWorkOrders(tx, after); err != nil {
			return err
		}
		out = after[0]
		return writeAudit(ctx, tx, "create", "work-orders", o.ID, nil, &out)
	})
	if err != nil {
		return WorkOrder{}, fmt.Errorf("create work order: %w", err)
	}
	return out, nil
}
