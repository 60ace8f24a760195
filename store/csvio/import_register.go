package csvio

import (
	"strings"

	"kelvard/health"
	"kelvard/store"
)

// This file writes the register kinds whose rows are upserts on a natural
// key: sites by name, areas by site and name, models by name, positions by
// site and tag, drives by serial.

// upsert creates the object when existing is nil and updates it otherwise.
// Every model column the row gives is set (skip leaves some out), then fill
// sets what needs the store (references by id). An update that changes
// nothing is reported unchanged and leaves no audit entry.
func upsert[T any, P store.Record[T]](im *importer, tx *store.Tx, r *row, existing *T, skip func(col string) bool,
	fill func(v *T, creating bool) error) (outcome, error) {
	set := func(v *T, creating bool) error {
		im.setModel(v, r, skip)
		if fill == nil {
			return nil
		}
		return fill(v, creating)
	}
	if existing == nil {
		_, err := store.CreateIn[T, P](im.ctx, tx, func(v *T) error { return set(v, true) })
		return created, err
	}
	_, changed, err := store.UpdateIn[T, P](im.ctx, tx, P(existing).Key(), func(v *T) error { return set(v, false) })
	if err != nil || !changed {
		return unchanged, err
	}
	return updated, nil
}

// setModel writes every model column the row gives into v.
func (im *importer) setModel(v any, r *row, skip func(col string) bool) {
	for _, c := range im.t.spec.columns {
		val, ok := r.vals[c.name]
		if !ok || c.index == nil || (skip != nil && skip(c.name)) {
			continue
		}
		setModel(v, c, val)
	}
}

// matches reports whether every model column the row gives equals v's.
func (im *importer) matches(v any, r *row) bool {
	for _, c := range im.t.spec.columns {
		val, ok := r.vals[c.name]
		if ok && c.index != nil && formatCell(getModel(v, c)) != formatCell(val) {
			return false
		}
	}
	return true
}

func (im *importer) site(tx *store.Tx, r *row) (outcome, error) {
	ex, err := findOne[store.Site](im.ctx, tx, map[string]string{"name": r.str("name")})
	if err != nil {
		return 0, err
	}
	return upsert(im, tx, r, ex, nil, nil)
}

func (im *importer) area(tx *store.Tx, r *row) (outcome, error) {
	siteID, err := im.siteID(tx, r)
	if err != nil {
		return 0, err
	}
	ex, err := findOne[store.Area](im.ctx, tx, map[string]string{"site_id": id(siteID), "name": r.str("name")})
	if err != nil {
		return 0, err
	}
	return upsert(im, tx, r, ex, nil, func(v *store.Area, creating bool) error {
		if creating {
			v.SiteID = siteID
		}
		return nil
	})
}

func (im *importer) model(tx *store.Tx, r *row) (outcome, error) {
	ex, err := findOne[store.DriveModel](im.ctx, tx, map[string]string{"name": r.str("name")})
	if err != nil {
		return 0, err
	}
	return upsert(im, tx, r, ex, nil, nil)
}

func (im *importer) position(tx *store.Tx, r *row) (outcome, error) {
	siteID, err := im.siteID(tx, r)
	if err != nil {
		return 0, err
	}
	ex, err := findOne[store.Position](im.ctx, tx, map[string]string{"site_id": id(siteID), "tag": r.str("tag")})
	if err != nil {
		return 0, err
	}
	var areaID int64
	if r.has("area") {
		if areaID, err = im.areaID(tx, siteID, r.str("area"), "area"); err != nil {
			return 0, err
		}
	}
	return upsert(im, tx, r, ex, nil, func(v *store.Position, creating bool) error {
		switch {
		case creating && areaID == 0:
			return store.Invalid("area", "is required for a new position")
		case creating:
			v.AreaID = areaID
		case areaID != 0 && areaID != v.AreaID:
			return store.Invalid("area", "cannot change: a position keeps its area (the API cannot move it either); register a new position instead")
		}
		return cabinetFor(v, r)
	})
}

// cabinetFor empties the cabinet of a position that stands in its own
// enclosure, as Export writes it, and refuses cabinet columns given for
// one.
func cabinetFor(v *store.Position, r *row) error {
	if v.Mounting != health.MountingOwn {
		return nil
	}
	var fe []store.FieldError
	for name := range r.vals {
		if strings.HasPrefix(name, "cabinet.") {
			fe = append(fe, store.FieldError{Field: name, Reason: "must be empty when mounting is " + string(health.MountingOwn)})
		}
	}
	if len(fe) > 0 {
		sortFields(fe)
		return &store.ValidationError{Fields: fe}
	}
	v.Cabinet = store.Cabinet{}
	return nil
}

func (im *importer) drive(tx *store.Tx, r *row) (outcome, error) {
	ex, err := findOne[store.Drive](im.ctx, tx, map[string]string{"serial": r.str("serial")})
	if err != nil {
		return 0, err
	}
	var siteID, modelID, storesID int64
	if r.has("site") {
		if siteID, err = im.siteID(tx, r); err != nil {
			return 0, err
		}
	}
	if r.has("model") {
		if modelID, err = im.modelID(tx, r.str("model")); err != nil {
			return 0, err
		}
	}
	if r.has("stores_area") {
		at := siteID
		if at == 0 && ex != nil {
			at = ex.SiteID
		}
		if at == 0 {
			return 0, store.Invalid("site", "is required to name a stores_area")
		}
		if storesID, err = im.areaID(tx, at, r.str("stores_area"), "stores_area"); err != nil {
			return 0, err
		}
	}
	// A drive becomes installed only through an installation: a row that
	// says installed (as Export writes an installed drive) leaves the
	// status to the installations file.
	skip := func(col string) bool { return col == "status" && r.str("status") == string(health.StatusInstalled) }
	return upsert(im, tx, r, ex, skip, func(v *store.Drive, creating bool) error {
		if creating || siteID != 0 {
			// A drive out of service may be sent to another site's
			// stores; the store refuses a site change while it stands at
			// a position.
			v.SiteID = siteID
		}
		if modelID != 0 {
			v.ModelID = modelID
		}
		if storesID != 0 {
			v.StoresAreaID = &storesID
		}
		return nil
	})
}
