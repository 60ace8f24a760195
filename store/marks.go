package store

import (
	"fmt"

	"gorm.io/gorm"
)

// A change in the register can change what a drive's life ledger should
// hold (a model's rating, an area's design maximum, a component fitted, a
// move). Such writes mark the drives they touch for recompute in the same
// transaction, so the next assessment replays them; the assessment's
// parameter fingerprint is the safety net for anything missed here.

// affecter is implemented by records whose writes can change assessments.
type affecter interface {
	// affected returns a subquery of the drive ids the record touches.
	affected(tx *gorm.DB) *gorm.DB
}

func (r *Site) affected(tx *gorm.DB) *gorm.DB {
	return tx.Raw("SELECT id FROM drives WHERE site_id = ? UNION SELECT i.drive_id FROM installations i JOIN positions p ON p.id = i.position_id WHERE p.site_id = ?", r.ID, r.ID)
}

func (r *Area) affected(tx *gorm.DB) *gorm.DB {
	return tx.Raw("SELECT i.drive_id FROM installations i JOIN positions p ON p.id = i.position_id WHERE p.area_id = ? UNION SELECT id FROM drives WHERE stores_area_id = ?", r.ID, r.ID)
}

func (r *DriveModel) affected(tx *gorm.DB) *gorm.DB {
	return tx.Raw("SELECT id FROM drives WHERE model_id = ?", r.ID)
}

func (r *Position) affected(tx *gorm.DB) *gorm.DB {
	return tx.Raw("SELECT drive_id FROM installations WHERE position_id = ?", r.ID)
}

func (r *Drive) affected(tx *gorm.DB) *gorm.DB { return tx.Raw("SELECT CAST(? AS bigint)", r.ID) }

func (r *Component) affected(tx *gorm.DB) *gorm.DB {
	return tx.Raw("SELECT CAST(? AS bigint)", r.DriveID)
}

func (r *Event) affected(tx *gorm.DB) *gorm.DB { return tx.Raw("SELECT CAST(? AS bigint)", r.DriveID) }

func (r *Installation) affected(tx *gorm.DB) *gorm.DB {
	return tx.Raw("SELECT CAST(? AS bigint)", r.DriveID)
}

// markAffected marks the drives a write touched for recompute.
func markAffected(tx *gorm.DB, rec any) error {
	a, ok := rec.(affecter)
	if !ok {
		return nil
	}
	return markRecompute(tx, a.affected(tx))
}

// markRecompute sets the recompute mark of the drives in the subquery that
// have been assessed (a drive never assessed is recomputed anyway).
func markRecompute(tx *gorm.DB, drives *gorm.DB) error {
	err := tx.Exec("UPDATE drive_watermarks SET recompute_from = COALESCE(recompute_from, assessed_to) WHERE drive_id IN (?)", drives).Error
	if err != nil {
		return fmt.Errorf("mark drives for recompute: %w", translate(err))
	}
	return nil
}
