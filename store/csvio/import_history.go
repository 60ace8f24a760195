package csvio

import (
	"cmp"
	"fmt"
	"slices"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// This file writes the history kinds. History only grows: a row already in
// the store is a no-op, so a file can be imported again.

// ---- installations

// stay is one installations row once its references are resolved.
type stay struct {
	r                *row
	driveID, posID   int64
	installedAt      time.Time
	removedAt        *time.Time
	status           health.DriveStatus
	existing         *store.Installation
	out              outcome
	pending          int
	failed, reported bool
	// duplicate marks a row that repeats an earlier row of the file.
	duplicate bool
}

// moveStep is one move in time order: putting a drive in (with notes), or
// taking it out.
type moveStep struct {
	s       *stay
	at      time.Time
	install bool
}

// installations applies the rows as moves in time order: an installation at
// installed_at, a removal at removed_at. A removal is not a move of its own
// when another row puts a drive into the same position, or the same drive
// elsewhere, at that same moment: Store.MoveDrive closes the stay then (a
// swap), and the removal only sets status_after.
func (im *importer) installations() error {
	var steps []moveStep
	planned := map[stayKey]*stay{}
	for _, r := range im.t.rows {
		s := &stay{r: r}
		if len(r.errs) > 0 {
			s.failed = true
			im.rowDone(s, r.errs)
			continue
		}
		err := im.tx.Savepoint(func(tx *store.Tx) error { return im.planStay(tx, s, planned) })
		if err != nil {
			if err := im.stayFailed(s, err, nil); err != nil {
				return err
			}
			continue
		}
		add := func(at time.Time, install bool, out outcome) {
			steps = append(steps, moveStep{s: s, at: at, install: install})
			s.pending++
			if s.out == 0 {
				s.out = out // the first step says what the row does
			}
		}
		switch {
		case s.duplicate:
		case s.existing == nil:
			add(s.installedAt, true, created)
		case r.has("notes") && r.str("notes") != s.existing.Notes:
			add(s.installedAt, true, updated)
		}
		if !s.duplicate && s.removedAt != nil && (s.existing == nil || s.existing.RemovedAt == nil) {
			add(*s.removedAt, false, updated)
		}
		if s.pending == 0 {
			s.out = unchanged
			im.rowDone(s, nil)
		}
	}
	// Installs before removals at the same moment, so a swap is one move;
	// then file order.
	slices.SortStableFunc(steps, func(a, b moveStep) int {
		if c := a.at.Compare(b.at); c != 0 {
			return c
		}
		if a.install != b.install {
			if a.install {
				return -1
			}
			return 1
		}
		return cmp.Compare(a.s.r.line, b.s.r.line)
	})
	for i := 0; i < len(steps); {
		j := i + 1
		for j < len(steps) && steps[j].install && steps[i].install && steps[j].at.Equal(steps[i].at) {
			j++
		}
		group, err := im.moveOrder(steps[i:j])
		if err != nil {
			return err
		}
		for _, st := range group {
			if err := im.applyStep(st); err != nil {
				return err
			}
		}
		i = j
	}
	return nil
}

// moveOrder orders the installs of one moment so that a drive moving on
// leaves its position before another drive arrives there: a drive moving
// between positions is not sent to stores on the way. Installs that wait on
// each other in a ring keep file order (the first one displaces).
func (im *importer) moveOrder(group []moveStep) ([]moveStep, error) {
	if len(group) < 2 {
		return group, nil
	}
	moving := map[int64]bool{}
	for _, st := range group {
		if !st.s.failed && st.s.existing == nil {
			moving[st.s.driveID] = true
		}
	}
	occupant := map[int64]int64{}
	for _, st := range group {
		d, err := findOne[store.Drive](im.ctx, im.tx, map[string]string{"position_id": id(st.s.posID)})
		if err != nil {
			return nil, err
		}
		if d != nil {
			occupant[st.s.posID] = d.ID
		}
	}
	out := make([]moveStep, 0, len(group))
	left := slices.Clone(group)
	for len(left) > 0 {
		pick := 0
		for k, st := range left {
			if o := occupant[st.s.posID]; o == 0 || o == st.s.driveID || !moving[o] {
				pick = k
				break
			}
		}
		st := left[pick]
		left = slices.Delete(left, pick, pick+1)
		out = append(out, st)
		delete(moving, st.s.driveID)
		for pos, d := range occupant {
			if d == st.s.driveID {
				delete(occupant, pos)
			}
		}
		occupant[st.s.posID] = st.s.driveID
	}
	return out, nil
}

// applyStep runs one move in its own savepoint.
func (im *importer) applyStep(st moveStep) error {
	s := st.s
	if s.failed {
		return nil
	}
	err := im.tx.Savepoint(func(tx *store.Tx) error {
		if st.install {
			return im.putIn(tx, s)
		}
		return im.takeOut(tx, s)
	})
	if err != nil {
		return im.stayFailed(s, err, &st)
	}
	s.pending--
	if s.pending == 0 {
		im.rowDone(s, nil)
	}
	return nil
}

// stayKey identifies a stay: drive, position and start.
type stayKey struct {
	drive, position int64
	at              time.Time
}

// planStay resolves a row and finds whether its stay is already recorded,
// in the store or by an earlier row of the file.
func (im *importer) planStay(tx *store.Tx, s *stay, planned map[stayKey]*stay) error {
	r := s.r
	var err error
	if s.driveID, err = im.driveID(tx, r); err != nil {
		return err
	}
	if s.posID, err = im.positionID(tx, r); err != nil {
		return err
	}
	s.installedAt = r.vals["installed_at"].(time.Time)
	if v, ok := r.vals["removed_at"].(time.Time); ok {
		if v.Before(s.installedAt) {
			return store.Invalid("removed_at", "must not be before installed_at")
		}
		s.removedAt = &v
	}
	if r.has("status_after") {
		s.status = health.DriveStatus(r.str("status_after"))
		if s.status != health.StatusInStores && s.status != health.StatusInRepair && s.status != health.StatusRetired {
			return store.Invalid("status_after", "must be one of [in_stores in_repair retired]")
		}
		if s.removedAt == nil {
			return store.Invalid("status_after", "is only for a stay with removed_at")
		}
	}
	ins, err := findAll[store.Installation](im.ctx, tx, map[string]string{"drive_id": id(s.driveID)})
	if err != nil {
		return err
	}
	for i, in := range ins {
		if in.PositionID == s.posID && in.InstalledAt.Equal(s.installedAt) {
			s.existing = &ins[i]
		}
	}
	if e := s.existing; e != nil && e.RemovedAt != nil && s.removedAt != nil && !e.RemovedAt.Equal(*s.removedAt) {
		return store.Invalid("removed_at", "the register has this stay ending at %s; history is not rewritten", e.RemovedAt.Format(time.RFC3339))
	}
	key := stayKey{s.driveID, s.posID, s.installedAt}
	if first, ok := planned[key]; ok {
		if s.removedAt != nil && (first.removedAt == nil || !first.removedAt.Equal(*s.removedAt)) || s.status != first.status ||
			(s.r.has("notes") && s.r.str("notes") != first.r.str("notes")) {
			return store.Invalid("installed_at", "line %d gives this stay already, differently", first.r.line)
		}
		s.duplicate = true
		return nil
	}
	planned[key] = s
	return nil
}

// putIn opens the stay, or only changes its notes when it exists.
func (im *importer) putIn(tx *store.Tx, s *stay) error {
	if s.existing != nil {
		_, _, err := store.UpdateIn(im.ctx, tx, s.existing.ID, func(v *store.Installation) error {
			v.Notes = s.r.str("notes")
			return nil
		})
		return err
	}
	_, err := tx.MoveDrive(im.ctx, s.driveID, store.Move{PositionID: &s.posID, At: s.installedAt, Notes: s.r.str("notes")})
	return err
}

// takeOut ends the stay at removed_at, unless a move at that moment has
// ended it already; then it only sets status_after.
func (im *importer) takeOut(tx *store.Tx, s *stay) error {
	ins, err := findAll[store.Installation](im.ctx, tx, map[string]string{"drive_id": id(s.driveID)})
	if err != nil {
		return err
	}
	var in *store.Installation
	for i := range ins {
		if ins[i].PositionID == s.posID && ins[i].InstalledAt.Equal(s.installedAt) {
			in = &ins[i]
		}
	}
	switch {
	case in == nil:
		return store.Invalid("installed_at", "no stay of this drive at this position began then")
	case in.RemovedAt == nil:
		_, err := tx.MoveDrive(im.ctx, s.driveID, store.Move{At: *s.removedAt, Status: s.status})
		return err
	case !in.RemovedAt.Equal(*s.removedAt):
		return store.Invalid("removed_at", "another move ended this stay at %s", in.RemovedAt.Format(time.RFC3339))
	}
	// A swap or a move elsewhere ended the stay; the drive went to stores.
	d, err := store.GetIn[store.Drive](im.ctx, tx, s.driveID)
	if err != nil {
		return err
	}
	if s.status == "" || d.PositionID != nil || d.Status == s.status {
		return nil
	}
	_, _, err = store.UpdateIn(im.ctx, tx, s.driveID, func(v *store.Drive) error {
		v.Status = s.status
		return nil
	})
	return err
}

// stayFailed records a failed row once, naming the columns of the step
// that failed.
func (im *importer) stayFailed(s *stay, err error, st *moveStep) error {
	fe, ok := im.rowErrors(s.r, err)
	if !ok {
		return fmt.Errorf("line %d: %w", s.r.line, err)
	}
	for i := range fe {
		fe[i].Field = stayColumn(fe[i].Field, st)
	}
	s.failed = true
	im.rowDone(s, fe)
	return nil
}

// stayColumn maps the fields of a move error to the row's columns.
func stayColumn(field string, st *moveStep) string {
	removal := st != nil && !st.install
	switch field {
	case "at":
		if removal {
			return "removed_at"
		}
		return "installed_at"
	case "status":
		return "status_after"
	case "position":
		if removal {
			return "removed_at"
		}
	}
	return field
}

// rowDone counts a finished row (rejected when fe is not empty).
func (im *importer) rowDone(s *stay, fe []store.FieldError) {
	if s.reported {
		return
	}
	s.reported = true
	im.step()
	if len(fe) > 0 {
		im.reject(fe)
		return
	}
	im.count(s.out)
}

// ---- components

// components applies the rows in order of installed_at, so a part fitted
// later replaces the one before it whatever the file's order.
func (im *importer) components() error {
	rows := slices.Clone(im.t.rows)
	slices.SortStableFunc(rows, func(a, b *row) int {
		ta, _ := a.vals["installed_at"].(time.Time)
		tb, _ := b.vals["installed_at"].(time.Time)
		return ta.Compare(tb)
	})
	for _, r := range rows {
		if err := im.apply(r, im.component); err != nil {
			return err
		}
	}
	return nil
}

// component writes one component row. The key is drive, kind and
// installed_at: a row with a known key updates that part (unchanged when
// identical). A new part closes the drive's open part of the same kind when
// that one is older (a replacement) and must not overlap any other.
func (im *importer) component(tx *store.Tx, r *row) (outcome, error) {
	driveID, err := im.driveID(tx, r)
	if err != nil {
		return 0, err
	}
	kind := health.ComponentKind(r.str("kind"))
	if !kind.Valid() {
		return 0, store.Invalid("kind", "must be one of %v", health.ComponentKinds())
	}
	at := r.vals["installed_at"].(time.Time)
	all, err := findAll[store.Component](im.ctx, tx, map[string]string{"drive_id": id(driveID), "kind": string(kind)})
	if err != nil {
		return 0, err
	}
	for i := range all {
		if all[i].InstalledAt.Equal(at) {
			return upsert(im, tx, r, &all[i], nil, nil)
		}
	}
	end, _ := r.vals["removed_at"].(time.Time)
	for _, c := range all {
		if c.RemovedAt == nil && c.InstalledAt.After(at) && end.IsZero() {
			return 0, store.Invalid("removed_at", "the drive has had a %s fitted since %s, later than this one; give this older part's removed_at",
				kind, c.InstalledAt.Format(time.RFC3339))
		}
	}
	for _, c := range all {
		switch {
		case c.RemovedAt == nil && c.InstalledAt.Before(at):
			// The open part is older: this row replaces it.
			if _, _, err := store.UpdateIn(im.ctx, tx, c.ID, func(v *store.Component) error {
				v.RemovedAt = &at
				return nil
			}); err != nil {
				return 0, err
			}
		case overlaps(c.InstalledAt, c.RemovedAt, at, end):
			return 0, store.Invalid("installed_at", "overlaps the %s fitted from %s", kind, c.InstalledAt.Format(time.RFC3339))
		}
	}
	return upsert(im, tx, r, nil, nil, func(v *store.Component, _ bool) error {
		v.DriveID = driveID
		return nil
	})
}

// overlaps reports whether [a0, a1) and [b0, b1) share time; a nil or zero
// end is open.
func overlaps(a0 time.Time, a1 *time.Time, b0, b1 time.Time) bool {
	return (a1 == nil || b0.Before(*a1)) && (b1.IsZero() || a0.Before(b1))
}

// ---- events

// event writes one event row. The drive is named by serial, or by site and
// position (the drive installed there at that moment). The key is drive,
// at and type: an identical event is a no-op and a differing one is
// updated.
func (im *importer) event(tx *store.Tx, r *row) (outcome, error) {
	var driveID, posID int64
	var err error
	if r.has("serial") {
		if driveID, err = im.driveID(tx, r); err != nil {
			return 0, err
		}
	}
	at := r.vals["at"].(time.Time)
	if r.has("position") {
		if posID, err = im.positionID(tx, r); err != nil {
			return 0, err
		}
		if driveID == 0 {
			if driveID, err = im.driveAt(tx, posID, at); err != nil {
				return 0, err
			}
		}
	}
	typ := health.EventType(r.str("type"))
	if !typ.Valid() {
		return 0, store.Invalid("type", "must be one of %v", health.EventTypes())
	}
	same, err := findAll[store.Event](im.ctx, tx, map[string]string{"drive_id": id(driveID), "type": string(typ),
		"from": at.Format(time.RFC3339Nano), "to": at.Add(time.Microsecond).Format(time.RFC3339Nano)})
	if err != nil {
		return 0, err
	}
	var ex *store.Event
	switch {
	case len(same) == 1:
		ex = &same[0]
	case len(same) > 1:
		for i := range same {
			if im.matches(&same[i], r) && (posID == 0 || (same[i].PositionID != nil && *same[i].PositionID == posID)) {
				return unchanged, nil
			}
		}
		return 0, store.Invalid("at", "%d events of this drive and type are logged at this moment; the import cannot tell which to change", len(same))
	}
	return upsert(im, tx, r, ex, nil, func(v *store.Event, creating bool) error {
		switch {
		case creating:
			v.DriveID = driveID
			if posID != 0 {
				v.PositionID = &posID
			}
		case posID != 0 && (v.PositionID == nil || *v.PositionID != posID):
			return store.Invalid("position", "cannot change: an event keeps the position it was logged at")
		}
		return nil
	})
}

// driveAt finds the drive that stood at the position at the moment.
func (im *importer) driveAt(tx *store.Tx, posID int64, at time.Time) (int64, error) {
	ins, err := findAll[store.Installation](im.ctx, tx, map[string]string{"position_id": id(posID)})
	if err != nil {
		return 0, err
	}
	for _, in := range ins {
		if !in.InstalledAt.After(at) && (in.RemovedAt == nil || in.RemovedAt.After(at)) {
			return in.DriveID, nil
		}
	}
	return 0, store.Invalid("position", "no drive stood at this position at %s", at.Format(time.RFC3339))
}
