package store

import (
	"context"
	"errors"
	"fmt"
	"time"
)

// WorkOrderStatusRow is one row of a status file from the plant's
// maintenance system: which order (by external reference, or by kelvard's
// id when the order has no reference yet) and its status, scheduled date,
// completion time and reason. Empty fields leave the order as it is.
type WorkOrderStatusRow struct {
	// Line is the row's line in the file, for errors.
	Line         int
	ID           int64
	ExternalRef  string
	Status       WorkOrderStatus
	ScheduledFor *time.Time
	DoneAt       *time.Time
	Reason       string
}

// StatusImportResult counts what a status import did.
type StatusImportResult struct {
	Rows      int `json:"rows"`
	Orders    int `json:"orders"`
	Changed   int `json:"changed"`
	Unchanged int `json:"unchanged"`
}

// ImportWorkOrderStatuses applies a status file in one transaction: every
// row or nothing. A row finds its order by external reference; a row whose
// reference no order carries yet finds it by id and gives it that
// reference. Rows of one order (an export has one row per line) must agree.
// A row that repeats the order's state changes nothing, so an export can be
// imported back unchanged. A completion through an import does each line as
// planned (WorkTask.DefaultAction). Errors name the file line and field.
func (s *Store) ImportWorkOrderStatuses(ctx context.Context, rows []WorkOrderStatusRow) (StatusImportResult, error) {
	res := StatusImportResult{Rows: len(rows)}
	err := s.InTx(ctx, func(t *Tx) error {
		res = StatusImportResult{Rows: len(rows)}
		var fe fieldErrors
		bad := func(r WorkOrderStatusRow, field, format string, args ...any) {
			fe = append(fe, FieldError{Field: field, Line: r.Line, Reason: fmt.Sprintf(format, args...)})
		}
		type pending struct {
			id    int64
			first WorkOrderStatusRow
		}
		var order []int64
		byOrder := map[int64]*pending{}
		for _, r := range rows {
			id := int64(0)
			if r.ExternalRef != "" {
				var o WorkOrder
				err := scoped(ctx, t.db.Model(&WorkOrder{}), workOrderInfo).Select("id").Where("external_ref = ?", r.ExternalRef).Take(&o).Error
				switch {
				case err == nil:
					id = o.ID
				case !errNoRows(err):
					return translate(err)
				}
			}
			if id == 0 && r.ID > 0 {
				var o WorkOrder
				err := scoped(ctx, t.db.Model(&WorkOrder{}), workOrderInfo).Select("id, external_ref").Where("id = ?", r.ID).Take(&o).Error
				switch {
				case errNoRows(err):
				case err != nil:
					return translate(err)
				case o.ExternalRef != "" && r.ExternalRef != "" && o.ExternalRef != r.ExternalRef:
					bad(r, "external_ref", "work order %d already carries reference %q", o.ID, o.ExternalRef)
					continue
				default:
					id = o.ID
				}
			}
			if id == 0 {
				bad(r, "external_ref", "no work order with reference %q or id %d", r.ExternalRef, r.ID)
				continue
			}
			if r.ID > 0 && r.ID != id {
				bad(r, "work_order_id", "reference %q belongs to work order %d, not %d", r.ExternalRef, id, r.ID)
				continue
			}
			p, seen := byOrder[id]
			if !seen {
				byOrder[id] = &pending{id: id, first: r}
				order = append(order, id)
				continue
			}
			f := p.first
			if f.Status != r.Status || !sameTime(f.ScheduledFor, r.ScheduledFor) || !sameTime(f.DoneAt, r.DoneAt) ||
				f.Reason != r.Reason || f.ExternalRef != r.ExternalRef {
				bad(r, "status", "disagrees with line %d about work order %d", f.Line, id)
			}
		}
		if err := fe.err(); err != nil {
			return err
		}
		res.Orders = len(order)
		for _, id := range order {
			r := byOrder[id].first
			cur, err := getWorkOrder(ctx, t.db, id)
			if err != nil {
				return err
			}
			ch, changed := statusChange(cur, r)
			if !changed {
				res.Unchanged++
				continue
			}
			err = t.Savepoint(func(st *Tx) error {
				_, err := changeWorkOrder(ctx, st, id, ch)
				return err
			})
			var ve *ValidationError
			switch {
			case errors.As(err, &ve):
				for _, f := range ve.Fields {
					fe = append(fe, FieldError{Field: f.Field, Line: r.Line, Reason: f.Reason})
				}
			case errors.Is(err, ErrDuplicate):
				bad(r, "external_ref", "reference %q is taken by another work order", r.ExternalRef)
			case err != nil:
				return err
			default:
				res.Changed++
			}
		}
		return fe.err()
	})
	if err != nil {
		return StatusImportResult{Rows: len(rows)}, fmt.Errorf("import work order statuses: %w", err)
	}
	return res, nil
}

// statusChange turns a row into the change it asks of the order, and says
// whether it asks for any.
func statusChange(o WorkOrder, r WorkOrderStatusRow) (WorkOrderChange, bool) {
	var ch WorkOrderChange
	changed := false
	if r.ExternalRef != "" && r.ExternalRef != o.ExternalRef {
		ref := r.ExternalRef
		ch.ExternalRef, changed = &ref, true
	}
	if r.Status != "" && r.Status != o.Status {
		ch.Status, changed = r.Status, true
		ch.Reason = r.Reason
		if r.Status == OrderDone {
			ch.DoneAt = r.DoneAt
		}
	}
	target := o.Status
	if ch.Status != "" {
		target = ch.Status
	}
	if r.ScheduledFor != nil && target == OrderScheduled && !sameTime(r.ScheduledFor, o.ScheduledFor) {
		ch.ScheduledFor, changed = r.ScheduledFor, true
		if ch.Status == "" {
			ch.Status = OrderScheduled
		}
	}
	return ch, changed
}

func sameTime(a, b *time.Time) bool {
	if a == nil || b == nil {
		return a == nil && b == nil
	}
	return a.Equal(*b)
}
