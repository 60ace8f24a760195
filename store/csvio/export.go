package csvio

import (
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"slices"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// Export writes every object of a kind that the principal in ctx may see,
// in the import format: natural keys instead of ids, nested objects
// flattened, columns in the order Columns gives and rows in a stable order
// of their natural keys. Importing the file into an empty store (after the
// kinds before it) and exporting again gives the same bytes.
func Export(ctx context.Context, st *store.Store, kind Kind, w io.Writer) error {
	sp, err := specOf(kind)
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	x := &exporter{ctx: ctx, st: st, sp: sp}
	var recs []record
	switch kind {
	case KindSites:
		recs, err = x.sites()
	case KindAreas:
		recs, err = x.areas()
	case KindModels:
		recs, err = x.models()
	case KindPositions:
		recs, err = x.positions()
	case KindDrives:
		recs, err = x.drives()
	case KindInstallations:
		recs, err = x.installations()
	case KindComponents:
		recs, err = x.components()
	case KindEvents:
		recs, err = x.events()
	}
	if err != nil {
		return fmt.Errorf("export %s: %w", kind, err)
	}
	slices.SortFunc(recs, func(a, b record) int {
		if c := slices.Compare(a.sort, b.sort); c != 0 {
			return c
		}
		return slices.Compare(a.cells, b.cells)
	})
	cw := csv.NewWriter(w)
	names, _ := Columns(kind)
	if err := cw.Write(names); err != nil {
		return fmt.Errorf("export %s: %w", kind, err)
	}
	for _, r := range recs {
		if err := cw.Write(r.cells); err != nil {
			return fmt.Errorf("export %s: %w", kind, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("export %s: %w", kind, err)
	}
	return nil
}

// record is one exported row and the key it is sorted by.
type record struct {
	sort  []string
	cells []string
}

// sortTime formats a time so that text order is time order.
func sortTime(t time.Time) string { return t.UTC().Format("2006-01-02T15:04:05.000000Z") }

type exporter struct {
	ctx context.Context
	st  *store.Store
	sp  *spec
}

// all lists every object of collection T the principal may see.
func all[T any, P store.Record[T]](x *exporter) ([]T, error) {
	var out []T
	q := store.ListQuery{Limit: store.MaxLimit}
	for {
		page, err := store.List[T, P](x.ctx, x.st, q)
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

// row builds the cells of v: model columns from v, references from refs.
func (x *exporter) row(v any, refs map[string]string) []string {
	cells := make([]string, len(x.sp.columns))
	for i, c := range x.sp.columns {
		if c.index == nil {
			cells[i] = refs[c.name]
			continue
		}
		val := getModel(v, c)
		if p, ok := val.(store.Parameters); ok && len(p) == 0 {
			// No overrides: an empty cell, which reads as "not given".
			continue
		}
		cells[i] = formatCell(val)
	}
	return cells
}

// names maps ids to names for the references a kind writes.
type names struct {
	sites, areas, models, serials map[int64]string
	positions                     map[int64]store.Position
}

// load reads the named collections. A kind's own rows are read first and
// their references after, so an object made in between is never missing.
func (x *exporter) load(sites, areas, models, positions, drives bool) (*names, error) {
	n := &names{sites: map[int64]string{}, areas: map[int64]string{}, models: map[int64]string{},
		serials: map[int64]string{}, positions: map[int64]store.Position{}}
	if sites {
		vs, err := all[store.Site](x)
		if err != nil {
			return nil, err
		}
		for _, v := range vs {
			n.sites[v.ID] = v.Name
		}
	}
	if areas {
		vs, err := all[store.Area](x)
		if err != nil {
			return nil, err
		}
		for _, v := range vs {
			n.areas[v.ID] = v.Name
		}
	}
	if models {
		vs, err := all[store.DriveModel](x)
		if err != nil {
			return nil, err
		}
		for _, v := range vs {
			n.models[v.ID] = v.Name
		}
	}
	if positions {
		vs, err := all[store.Position](x)
		if err != nil {
			return nil, err
		}
		for _, v := range vs {
			n.positions[v.ID] = v
		}
	}
	if drives {
		vs, err := all[store.Drive](x)
		if err != nil {
			return nil, err
		}
		for _, v := range vs {
			n.serials[v.ID] = v.Serial
		}
	}
	return n, nil
}

func (x *exporter) sites() ([]record, error) {
	vs, err := all[store.Site](x)
	if err != nil {
		return nil, err
	}
	out := make([]record, len(vs))
	for i := range vs {
		out[i] = record{sort: []string{vs[i].Name}, cells: x.row(&vs[i], nil)}
	}
	return out, nil
}

func (x *exporter) areas() ([]record, error) {
	vs, err := all[store.Area](x)
	if err != nil {
		return nil, err
	}
	n, err := x.load(true, false, false, false, false)
	if err != nil {
		return nil, err
	}
	out := make([]record, len(vs))
	for i, v := range vs {
		site := n.sites[v.SiteID]
		out[i] = record{sort: []string{site, v.Name}, cells: x.row(&vs[i], map[string]string{"site": site})}
	}
	return out, nil
}

func (x *exporter) models() ([]record, error) {
	vs, err := all[store.DriveModel](x)
	if err != nil {
		return nil, err
	}
	out := make([]record, len(vs))
	for i := range vs {
		out[i] = record{sort: []string{vs[i].Name}, cells: x.row(&vs[i], nil)}
	}
	return out, nil
}

func (x *exporter) positions() ([]record, error) {
	vs, err := all[store.Position](x)
	if err != nil {
		return nil, err
	}
	n, err := x.load(true, true, false, false, false)
	if err != nil {
		return nil, err
	}
	out := make([]record, len(vs))
	for i, v := range vs {
		site := n.sites[v.SiteID]
		cells := x.row(&vs[i], map[string]string{"site": site, "area": n.areas[v.AreaID]})
		if v.Mounting == health.MountingOwn {
			// No cabinet: leave its columns empty rather than zeros.
			for j, c := range x.sp.columns {
				if strings.HasPrefix(c.name, "cabinet.") {
					cells[j] = ""
				}
			}
		}
		out[i] = record{sort: []string{site, v.Tag}, cells: cells}
	}
	return out, nil
}

func (x *exporter) drives() ([]record, error) {
	vs, err := all[store.Drive](x)
	if err != nil {
		return nil, err
	}
	n, err := x.load(true, true, true, false, false)
	if err != nil {
		return nil, err
	}
	out := make([]record, len(vs))
	for i, v := range vs {
		refs := map[string]string{"site": n.sites[v.SiteID], "model": n.models[v.ModelID]}
		if v.StoresAreaID != nil {
			refs["stores_area"] = n.areas[*v.StoresAreaID]
		}
		out[i] = record{sort: []string{v.Serial}, cells: x.row(&vs[i], refs)}
	}
	return out, nil
}

// installations writes one row per stay. status_after is written for the
// drive's last stay when it has ended and the drive is not in stores;
// earlier statuses between stays are not kept by the register. A stay at a
// position outside the principal's sites is left out.
func (x *exporter) installations() ([]record, error) {
	vs, err := all[store.Installation](x)
	if err != nil {
		return nil, err
	}
	n, err := x.load(true, false, false, true, false)
	if err != nil {
		return nil, err
	}
	drives, err := all[store.Drive](x)
	if err != nil {
		return nil, err
	}
	byID := make(map[int64]store.Drive, len(drives))
	for _, d := range drives {
		byID[d.ID] = d
	}
	last := map[int64]store.Installation{}
	for _, v := range vs {
		if l, ok := last[v.DriveID]; !ok || v.InstalledAt.After(l.InstalledAt) {
			last[v.DriveID] = v
		}
	}
	out := make([]record, 0, len(vs))
	for i, v := range vs {
		p, okP := n.positions[v.PositionID]
		d, okD := byID[v.DriveID]
		if !okP || !okD {
			continue
		}
		refs := map[string]string{"serial": d.Serial, "site": n.sites[p.SiteID], "position": p.Tag}
		if v.RemovedAt != nil && last[v.DriveID].ID == v.ID && d.PositionID == nil && d.Status != health.StatusInStores {
			refs["status_after"] = string(d.Status)
		}
		out = append(out, record{sort: []string{sortTime(v.InstalledAt), refs["site"], p.Tag, d.Serial}, cells: x.row(&vs[i], refs)})
	}
	return out, nil
}

func (x *exporter) components() ([]record, error) {
	vs, err := all[store.Component](x)
	if err != nil {
		return nil, err
	}
	n, err := x.load(false, false, false, false, true)
	if err != nil {
		return nil, err
	}
	out := make([]record, 0, len(vs))
	for i, v := range vs {
		serial, ok := n.serials[v.DriveID]
		if !ok {
			continue
		}
		out = append(out, record{sort: []string{serial, string(v.Kind), sortTime(v.InstalledAt)},
			cells: x.row(&vs[i], map[string]string{"serial": serial})})
	}
	return out, nil
}

// events writes one row per event. An event logged at a position the
// principal cannot see names its drive by serial alone.
func (x *exporter) events() ([]record, error) {
	vs, err := all[store.Event](x)
	if err != nil {
		return nil, err
	}
	n, err := x.load(true, false, false, true, true)
	if err != nil {
		return nil, err
	}
	out := make([]record, 0, len(vs))
	for i, v := range vs {
		serial, ok := n.serials[v.DriveID]
		if !ok {
			continue
		}
		refs := map[string]string{"serial": serial}
		if v.PositionID != nil {
			if p, ok := n.positions[*v.PositionID]; ok {
				refs["site"], refs["position"] = n.sites[p.SiteID], p.Tag
			}
		}
		out = append(out, record{sort: []string{sortTime(v.At), serial, string(v.Type)}, cells: x.row(&vs[i], refs)})
	}
	return out, nil
}
