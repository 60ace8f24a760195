package store

import (
	"context"
	"errors"
	"fmt"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// Move puts a drive into a position or takes it out of one.
type Move struct {
	// PositionID is the position the drive goes to; nil takes the drive
	// out of its position.
	PositionID *int64 `json:"position_id"`
	// At is when the move happened; zero means now.
	At time.Time `json:"at"`
	// Status is the drive's status after it leaves a position: in_stores
	// (default), in_repair or retired. A drive displaced from the target
	// position goes to stores.
	Status health.DriveStatus `json:"status"`
	Notes  string             `json:"notes"`
}

// MoveResult reports a move: the installation opened (nil when the drive
// was only taken out) and the ids of installations closed.
type MoveResult struct {
	Opened *Installation `json:"opened"`
	Closed []int64       `json:"closed"`
	// Displaced is the drive that stood at the target position and went to
	// stores, if any.
	Displaced *int64 `json:"displaced_drive_id,omitempty"`
}

// MoveDrive moves a drive in one transaction: it closes the drive's current
// installation, closes the installation of any drive standing at the target
// position (that drive goes to stores), opens the new installation and
// updates both drives. History is append-only: a move cannot be dated
// before the latest move of the drive or the position.
func (s *Store) MoveDrive(ctx context.Context, driveID int64, m Move) (MoveResult, error) {
	var res MoveResult
	err := s.tx(ctx, func(tx *gorm.DB) error {
		var err error
		res, err = moveDrive(ctx, tx, s.dialect, driveID, m)
		return err
	})
	if err != nil {
		return MoveResult{}, fmt.Errorf("move drive %d: %w", driveID, err)
	}
	return res, nil
}

// moveDrive is MoveDrive inside tx.
func moveDrive(ctx context.Context, tx *gorm.DB, dialect Dialect, driveID int64, m Move) (MoveResult, error) {
	var res MoveResult
	err := func() error {
		d, err := get[Drive](ctx, lockRow(tx, dialect), driveID)
		if err != nil {
			return err
		}
		before := d
		at := utc(m.At)
		if m.At.IsZero() {
			at = utc(tx.NowFunc())
		}
		var fe fieldErrors
		if at.After(tx.NowFunc().Add(5 * time.Minute)) {
			fe.add("at", "must not lie more than 5 minutes in the future")
		}
		if at.Before(d.ManufacturedAt) {
			fe.add("at", "must not be before the drive was made (%s)", d.ManufacturedAt.Format(time.RFC3339))
		}
		fe.text("notes", m.Notes, false, 4000)
		if last, err := latestMove(tx, "drive_id", driveID); err != nil {
			return err
		} else if at.Before(last) {
			fe.add("at", "must not be before the drive's latest move (%s)", last.Format(time.RFC3339))
		}
		if m.PositionID == nil {
			if m.Status == "" {
				m.Status = health.StatusInStores
			}
			if m.Status != health.StatusInStores && m.Status != health.StatusInRepair && m.Status != health.StatusRetired {
				fe.add("status", "must be one of [in_stores in_repair retired]")
			}
			if d.PositionID == nil {
				fe.add("position_id", "the drive stands at no position")
			}
		} else if m.Status != "" {
			fe.add("status", "is only for taking a drive out of a position")
		}
		var pos Position
		if m.PositionID != nil {
			pos, err = get[Position](ctx, tx, *m.PositionID)
			if errors.Is(err, ErrNotFound) {
				fe.add("position_id", "no position with id %d", *m.PositionID)
			} else if err != nil {
				return err
			} else {
				if d.PositionID != nil && *d.PositionID == pos.ID {
					fe.add("position_id", "the drive already stands at position %d", pos.ID)
				}
				if last, err := latestMove(tx, "position_id", pos.ID); err != nil {
					return err
				} else if at.Before(last) {
					fe.add("at", "must not be before the position's latest move (%s)", last.Format(time.RFC3339))
				}
			}
		}
		if err := fe.err(); err != nil {
			return err
		}

		// Close the drive's own installation.
		if d.PositionID != nil {
			id, err := closeInstallation(tx, "drive_id", d.ID, at)
			if err != nil {
				return err
			}
			res.Closed = append(res.Closed, id)
		}
		if m.PositionID == nil {
			d.PositionID, d.Status, d.LastEnergisedAt = nil, m.Status, &at
			if err := tx.Select("position_id", "status", "last_energised_at", "updated_at").Save(&d).Error; err != nil {
				return fmt.Errorf("update drive %d: %w", d.ID, translate(err))
			}
			if err := markRecompute(tx, tx.Raw("SELECT CAST(? AS bigint)", d.ID)); err != nil {
				return err
			}
			return writeAudit(ctx, tx, "remove", "drives", d.ID, &before, &d)
		}

		// Displace whatever stands at the target position.
		var other Drive
		err = tx.Where("position_id = ?", pos.ID).Take(&other).Error
		switch {
		case err == nil:
			otherBefore := other
			id, err := closeInstallation(tx, "position_id", pos.ID, at)
			if err != nil {
				return err
			}
			res.Closed = append(res.Closed, id)
			other.PositionID, other.Status, other.LastEnergisedAt = nil, health.StatusInStores, &at
			if err := tx.Select("position_id", "status", "last_energised_at", "updated_at").Save(&other).Error; err != nil {
				return fmt.Errorf("update displaced drive %d: %w", other.ID, translate(err))
			}
			res.Displaced = &other.ID
			if err := writeAudit(ctx, tx, "remove", "drives", other.ID, &otherBefore, &other); err != nil {
				return err
			}
		case !errNoRows(err):
			return fmt.Errorf("find the drive at position %d: %w", pos.ID, err)
		}

		in := Installation{DriveID: d.ID, PositionID: pos.ID, InstalledAt: at, Notes: m.Notes}
		if err := tx.Create(&in).Error; err != nil {
			return fmt.Errorf("open installation: %w", translate(err))
		}
		d.PositionID, d.Status, d.SiteID, d.StoresAreaID = &pos.ID, health.StatusInstalled, pos.SiteID, nil
		if err := tx.Select("position_id", "status", "site_id", "stores_area_id", "updated_at").Save(&d).Error; err != nil {
			return fmt.Errorf("update drive %d: %w", d.ID, translate(err))
		}
		res.Opened = &in
		if err := writeAudit(ctx, tx, "create", "installations", in.ID, nil, &in); err != nil {
			return err
		}
		if err := markRecompute(tx, tx.Raw("SELECT CAST(? AS bigint) UNION SELECT CAST(? AS bigint)", d.ID, ptrOr(res.Displaced, d.ID))); err != nil {
			return err
		}
		return writeAudit(ctx, tx, "install", "drives", d.ID, &before, &d)
	}()
	if err != nil {
		return MoveResult{}, err
	}
	return res, nil
}

// latestMove returns the latest installed_at or removed_at among the
// installations with column = id.
func latestMove(tx *gorm.DB, column string, id int64) (time.Time, error) {
	var ins []Installation
	if err := tx.Where(column+" = ?", id).Order("installed_at DESC").Limit(1).Find(&ins).Error; err != nil {
		return time.Time{}, fmt.Errorf("latest installation by %s %d: %w", column, id, err)
	}
	if len(ins) == 0 {
		return time.Time{}, nil
	}
	if ins[0].RemovedAt != nil {
		return *ins[0].RemovedAt, nil
	}
	return ins[0].InstalledAt, nil
}

// closeInstallation ends the open installation with column = id at the
// given time and returns its id.
func closeInstallation(tx *gorm.DB, column string, id int64, at time.Time) (int64, error) {
	var in Installation
	if err := tx.Where(column+" = ? AND removed_at IS NULL", id).Take(&in).Error; err != nil {
		return 0, fmt.Errorf("open installation by %s %d: %w", column, id, translate(err))
	}
	in.RemovedAt = &at
	if err := tx.Select("removed_at", "updated_at").Save(&in).Error; err != nil {
		return 0, fmt.Errorf("close installation %d: %w", in.ID, translate(err))
	}
	return in.ID, nil
}

func ptrOr(p *int64, def int64) int64 {
	if p == nil {
		return def
	}
	return *p
}

// beforeDelete undoes an installation: when it is the drive's current one,
// the drive goes back to stores.
func (r *Installation) beforeDelete(ctx context.Context, tx *gorm.DB) error {
	if err := markRecompute(tx, tx.Raw("SELECT CAST(? AS bigint)", r.DriveID)); err != nil {
		return err
	}
	if r.RemovedAt != nil {
		return nil
	}
	res := tx.Model(&Drive{}).Where("id = ? AND position_id = ?", r.DriveID, r.PositionID).
		Updates(map[string]any{"position_id": nil, "status": health.StatusInStores, "updated_at": tx.NowFunc()})
	if res.Error != nil {
		return fmt.Errorf("return drive %d to stores: %w", r.DriveID, translate(res.Error))
	}
	return nil
}

// InstalledAt returns the drive that stood at the position at time t.
func (s *Store) InstalledAt(ctx context.Context, positionID int64, t time.Time) (int64, error) {
	var in Installation
	err := s.db.WithContext(ctx).Where("position_id = ? AND installed_at <= ? AND (removed_at IS NULL OR removed_at > ?)", positionID, utc(t), utc(t)).
		Take(&in).Error
	if errNoRows(err) {
		return 0, fmt.Errorf("position %d at %s: %w", positionID, t.Format(time.RFC3339), ErrNotFound)
	}
	if err != nil {
		return 0, fmt.Errorf("position %d at %s: %w", positionID, t.Format(time.RFC3339), translate(err))
	}
	return in.DriveID, nil
}
