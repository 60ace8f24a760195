package plan

import (
	"time"

	"kelvard/health"
	"kelvard/store"
)

// index gives quick answers about planning data: a drive's current
// components, where it stands, its failures and installations.
type index struct {
	d          *store.PlanningData
	components map[int64][]store.Component
	installs   map[int64][]store.Installation
	failures   map[int64][]store.Event
}

func newIndex(d *store.PlanningData) *index {
	ix := &index{d: d, components: map[int64][]store.Component{}, installs: map[int64][]store.Installation{},
		failures: map[int64][]store.Event{}}
	for _, c := range d.Components {
		ix.components[c.DriveID] = append(ix.components[c.DriveID], c)
	}
	for _, in := range d.Installations {
		ix.installs[in.DriveID] = append(ix.installs[in.DriveID], in)
	}
	for _, e := range d.Failures {
		ix.failures[e.DriveID] = append(ix.failures[e.DriveID], e)
	}
	return ix
}

// current returns the id of the drive's component of the kind fitted now
// (0 when none is registered).
func (ix *index) current(driveID int64, kind health.ComponentKind) int64 {
	var id int64
	var at time.Time
	for _, c := range ix.components[driveID] {
		if c.Kind == kind && c.RemovedAt == nil && (id == 0 || !c.InstalledAt.Before(at)) {
			id, at = c.ID, c.InstalledAt
		}
	}
	return id
}

// itemBase fills the drive's identity and place into a forecast item: its
// position and area when installed, its stores area otherwise.
func (ix *index) itemBase(dr store.Drive, m store.DriveModel) ForecastItem {
	it := ForecastItem{DriveID: dr.ID, Serial: dr.Serial, ModelID: m.ID, Model: m.Name, SiteID: dr.SiteID, Site: ix.d.Sites[dr.SiteID].Name}
	area := dr.StoresAreaID
	if dr.PositionID != nil {
		p := ix.d.Positions[*dr.PositionID]
		id := p.ID
		it.PositionID, it.Position = &id, p.Tag
		a := p.AreaID
		area = &a
	}
	if area != nil {
		a := *area
		it.AreaID, it.Area = &a, ix.d.Areas[a].Name
	}
	return it
}

// areaAt returns the area of the position the drive stood at at time t (the
// installation covering t, or the last one before t), if any.
func (ix *index) areaAt(driveID int64, t time.Time) (int64, bool) {
	var pos int64
	for _, in := range ix.installs[driveID] {
		if in.InstalledAt.After(t) {
			break
		}
		pos = in.PositionID
	}
	if pos == 0 {
		return 0, false
	}
	p, ok := ix.d.Positions[pos]
	if !ok {
		return 0, false
	}
	return p.AreaID, true
}
