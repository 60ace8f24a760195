package csvio

import (
	"context"
	"strconv"

	"kelvard/store"
)

// refs resolves natural keys (a site's name, a position's site and tag, a
// drive's serial) to ids inside the import's transaction, remembering the
// answers. Only kinds the import does not write are remembered, so a row
// rolled back to its savepoint cannot leave a stale id behind.
type refs struct {
	sites     map[string]int64
	areas     map[[2]string]int64
	models    map[string]int64
	positions map[[2]string]int64
	drives    map[string]int64
}

func newRefs() *refs {
	return &refs{sites: map[string]int64{}, areas: map[[2]string]int64{}, models: map[string]int64{},
		positions: map[[2]string]int64{}, drives: map[string]int64{}}
}

// findOne returns the object of collection T that matches the list filters,
// or nil. Lists honour the principal's site limit, so an object at another
// site is not found.
func findOne[T any, P store.Record[T]](ctx context.Context, tx *store.Tx, filters map[string]string) (*T, error) {
	page, err := store.ListIn[T, P](ctx, tx, store.ListQuery{Filters: filters, Limit: 1})
	if err != nil {
		return nil, err
	}
	if len(page.Items) == 0 {
		return nil, nil
	}
	return &page.Items[0], nil
}

// findAll returns every object of collection T that matches the filters.
func findAll[T any, P store.Record[T]](ctx context.Context, tx *store.Tx, filters map[string]string) ([]T, error) {
	var out []T
	q := store.ListQuery{Filters: filters, Limit: store.MaxLimit}
	for {
		page, err := store.ListIn[T, P](ctx, tx, q)
		if err != nil {
			return nil, err
		}
		out = append(out, page.Items...)
		if page.Next == "" {
			return out, nil
		}
		q.Cursor = page.Next
	}
}

func id(v int64) string { return strconv.FormatInt(v, 10) }

// cached looks key up in m, asking find on a miss; a found id is kept.
func cached[K comparable](m map[K]int64, key K, find func() (int64, error)) (int64, error) {
	if v, ok := m[key]; ok {
		return v, nil
	}
	v, err := find()
	if err != nil {
		return 0, err
	}
	if v != 0 {
		m[key] = v
	}
	return v, nil
}

// siteID resolves the row's site column.
func (im *importer) siteID(tx *store.Tx, r *row) (int64, error) {
	name := r.str("site")
	if name == "" {
		return 0, store.Invalid("site", "is required")
	}
	v, err := cached(im.refs.sites, name, func() (int64, error) {
		s, err := findOne[store.Site](im.ctx, tx, map[string]string{"name": name})
		if err != nil || s == nil {
			return 0, err
		}
		return s.ID, nil
	})
	if err == nil && v == 0 {
		err = store.Invalid("site", "no site named %q", name)
	}
	return v, err
}

// areaID resolves an area by name within a site; col names the column the
// name came from.
func (im *importer) areaID(tx *store.Tx, siteID int64, name, col string) (int64, error) {
	v, err := cached(im.refs.areas, [2]string{id(siteID), name}, func() (int64, error) {
		a, err := findOne[store.Area](im.ctx, tx, map[string]string{"site_id": id(siteID), "name": name})
		if err != nil || a == nil {
			return 0, err
		}
		return a.ID, nil
	})
	if err == nil && v == 0 {
		err = store.Invalid(col, "no area named %q at that site", name)
	}
	return v, err
}

// modelID resolves the row's model column.
func (im *importer) modelID(tx *store.Tx, name string) (int64, error) {
	v, err := cached(im.refs.models, name, func() (int64, error) {
		m, err := findOne[store.DriveModel](im.ctx, tx, map[string]string{"name": name})
		if err != nil || m == nil {
			return 0, err
		}
		return m.ID, nil
	})
	if err == nil && v == 0 {
		err = store.Invalid("model", "no drive model named %q", name)
	}
	return v, err
}

// positionID resolves the row's site and position columns.
func (im *importer) positionID(tx *store.Tx, r *row) (int64, error) {
	siteID, err := im.siteID(tx, r)
	if err != nil {
		return 0, err
	}
	tag := r.str("position")
	v, err := cached(im.refs.positions, [2]string{id(siteID), tag}, func() (int64, error) {
		p, err := findOne[store.Position](im.ctx, tx, map[string]string{"site_id": id(siteID), "tag": tag})
		if err != nil || p == nil {
			return 0, err
		}
		return p.ID, nil
	})
	if err == nil && v == 0 {
		err = store.Invalid("position", "no position tagged %q at site %q", tag, r.str("site"))
	}
	return v, err
}

// driveID resolves the row's serial column (not for the drives kind, which
// writes drives).
func (im *importer) driveID(tx *store.Tx, r *row) (int64, error) {
	serial := r.str("serial")
	v, err := cached(im.refs.drives, serial, func() (int64, error) {
		d, err := findOne[store.Drive](im.ctx, tx, map[string]string{"serial": serial})
		if err != nil || d == nil {
			return 0, err
		}
		return d.ID, nil
	})
	if err == nil && v == 0 {
		err = store.Invalid("serial", "no drive with serial %q", serial)
	}
	return v, err
}
