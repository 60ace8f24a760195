package store

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"slices"
	"sort"
	"strings"
	"time"

	"gorm.io/gorm"
)

// Ingest stores a batch of readings in one transaction.
//
// Each row names its position by tag (and site, where the tag is used at
// several sites, or by PositionID from Go); positions outside the caller's
// sites are unknown. The reading belongs to the drive installed there at its
// time. Rows are checked for plausible values (DESIGN.md section 3): every
// temperature within -50…150 °C, currents from 0 to ten times the drive
// model's normal-duty rating, voltages, hours, fractions, frequency,
// capacitance and ESR not negative, no NaN or infinity, time at most five
// minutes past the store's clock, and no position and time twice in one
// batch.
//
// Without opts.Partial any bad row refuses the batch: nothing is written
// and the error is a *ValidationError naming every bad field with its row
// and line. With it the valid rows are stored and the bad ones reported in
// Rejected.
//
// Ingest is idempotent: a reading whose drive and time are already stored
// with the same values counts as AlreadyPresent; with other values it is
// reported in Conflicts and the stored row is kept. In the same transaction
// every drive that received a new reading at or before its assessment
// watermark (drive_watermarks.assessed_to) has recompute_from lowered to its
// earliest new reading.
//
// Lookups are made once per batch: one query for the positions named and
// one for their installation history with each drive's rated current.
func (s *Store) Ingest(ctx context.Context, rows []Reading, opts IngestOptions) (IngestResult, error) {
	var res IngestResult
	var err error
	switch s.dialect {
	case Postgres:
		res, err = s.ingestPostgres(ctx, rows, opts)
	case SQLite:
		res, err = s.ingestSQLite(ctx, rows, opts)
	default:
		err = fmt.Errorf("no ingest for dialect %q", s.dialect)
	}
	if err != nil {
		return IngestResult{}, fmt.Errorf("ingest %d readings: %w", len(rows), err)
	}
	if res.Conflicts == nil {
		res.Conflicts = []Conflict{}
	}
	if res.Rejected == nil {
		res.Rejected = []FieldError{}
	}
	return res, nil
}

// readingKey is a reading's natural key: drive and Unix microseconds.
type readingKey struct {
	drive int64
	at    int64
}

// plannedRow is a row that passed every check: where it goes.
type plannedRow struct {
	idx        int // index in the caller's rows
	driveID    int64
	positionID int64
	at         time.Time // UTC, microseconds
}

// ingestPlan is a checked batch: the rows to write, in input order, and
// the bad fields found.
type ingestPlan struct {
	rows []Reading
	good []plannedRow
	// byKey maps a good row's natural key to its index in good; made on
	// first use by keyIndex.
	byKey map[readingKey]int
	// bad lists every bad field, the parser's refusals included.
	bad []FieldError
	// months lists the months (year*12 + month-1) the good rows fall in.
	months []int
}

// rowNumber returns the 1-based row number of rows[i].
func rowNumber(rows []Reading, i int) int {
	if rows[i].Row > 0 {
		return rows[i].Row
	}
	return i + 1
}

// ingestPosition is a position as the ingest sees it, with its installation
// history sorted by time.
type ingestPosition struct {
	ID     int64
	SiteID int64
	Tag    string
	Site   string
	stays  []stay
}

// stay is one installation with its drive's rated current.
type stay struct {
	PositionID  int64
	DriveID     int64
	InstalledAt time.Time
	RemovedAt   *time.Time
	RatedA      float64
}

// stayAt returns the installation covering t, if any.
func (p *ingestPosition) stayAt(t time.Time) (stay, bool) {
	i := sort.Search(len(p.stays), func(i int) bool { return p.stays[i].InstalledAt.After(t) }) - 1
	if i < 0 {
		return stay{}, false
	}
	st := p.stays[i]
	if st.RemovedAt != nil && !t.Before(*st.RemovedAt) {
		return stay{}, false
	}
	return st, true
}

// plan checks a batch and resolves every row's position and drive. db is
// the handle the lookups run on (the write transaction on SQLite).
func (s *Store) plan(ctx context.Context, db *gorm.DB, rows []Reading, opts IngestOptions) (*ingestPlan, error) {
	p := &ingestPlan{rows: rows, bad: slices.Clone(opts.Refused)}
	now := s.now()
	badRow := make([]bool, len(rows))
	flag := func(i int, field, format string, args ...any) {
		badRow[i] = true
		p.bad = append(p.bad, FieldError{Field: field, Row: rowNumber(rows, i), Line: rows[i].Line, Reason: fmt.Sprintf(format, args...)})
	}

	// Checks that need no lookups.
	for i := range rows {
		r := &rows[i]
		if !GoodText(r.Position) {
			flag(i, "position", "%s", BadTextReason)
		}
		if !GoodText(r.Site) {
			flag(i, "site", "%s", BadTextReason)
		}
		switch {
		case r.At.IsZero():
			flag(i, "at", "is required")
		case r.At.After(now.Add(readingMaxAhead)):
			flag(i, "at", "lies more than 5 minutes ahead of the server's clock (%s)", now.Format(time.RFC3339))
		}
		for j, v := range r.values() {
			if v == nil {
				continue
			}
			if why := checkValue(j, *v); why != "" {
				flag(i, readingValueNames[j], "%s", why)
			}
		}
	}

	positions, err := s.lookupPositions(ctx, db, rows, opts.PositionID)
	if err != nil {
		return nil, err
	}
	var fixed *ingestPosition
	if opts.PositionID > 0 {
		if fixed = positions.byID[opts.PositionID]; fixed == nil {
			return nil, fmt.Errorf("position %d: %w", opts.PositionID, ErrNotFound)
		}
	}

	p.good = make([]plannedRow, 0, len(rows))
	// seen holds the row number of every resolved row by natural key, bad
	// rows included, so a repeat is reported whatever became of the first.
	seen := make(map[readingKey]int, len(rows))
	lastMonth := -1
	for i := range rows {
		r := &rows[i]
		if !GoodText(r.Position) || !GoodText(r.Site) {
			continue // flagged above; never looked up
		}
		pos, how := positions.resolve(r, fixed)
		if !how.ok {
			flag(i, how.field, "%s", how.reason)
			continue
		}
		if r.At.IsZero() {
			continue
		}
		at := utc(r.At)
		st, found := pos.stayAt(at)
		if !found {
			flag(i, "at", "no drive was installed at position %s at %s", pos.describe(), at.Format(time.RFC3339Nano))
			continue
		}
		if st.RatedA > 0 {
			limit := readingMaxCurrentMultiple * st.RatedA
			if r.CurrentA != nil && *r.CurrentA > limit {
				flag(i, "current_a", "must not exceed %g A (%d × the drive model's normal-duty rating of %g A)", limit, readingMaxCurrentMultiple, st.RatedA)
			}
			if r.PeakCurrentA != nil && *r.PeakCurrentA > limit {
				flag(i, "peak_current_a", "must not exceed %g A (%d × the drive model's normal-duty rating of %g A)", limit, readingMaxCurrentMultiple, st.RatedA)
			}
		}
		key := readingKey{drive: st.DriveID, at: at.UnixMicro()}
		if first, dup := seen[key]; dup {
			flag(i, "at", "repeats row %d: the same position and time", first)
			continue
		}
		seen[key] = rowNumber(rows, i)
		if badRow[i] {
			continue
		}
		p.good = append(p.good, plannedRow{idx: i, driveID: st.DriveID, positionID: pos.ID, at: at})
		if m := monthOf(at); m != lastMonth {
			lastMonth = m
			if !slices.Contains(p.months, m) {
				p.months = append(p.months, m)
			}
		}
	}
	if err := s.refuseRolledUp(ctx, db, p, flag); err != nil {
		return nil, err
	}
	slices.SortStableFunc(p.bad, func(a, b FieldError) int { return a.Row - b.Row })
	return p, nil
}

// refuseRolledUp flags the good rows that fall in an hour their drive
// keeps only as a roll-up (health.HourAggregate over (hour, hour+1h]): raw
// readings older than the raw retention are replaced by hourly aggregates,
// and an aggregate cannot take in one more reading, so such a row is
// refused instead of acknowledged and then dropped at the next roll-up.
// It costs one index probe per month of the batch; only a month with
// roll-ups is looked at row by row.
func (s *Store) refuseRolledUp(ctx context.Context, db *gorm.DB, p *ingestPlan, flag func(i int, field, format string, args ...any)) error {
	var rolled []int
	for _, m := range p.months {
		start := time.Date(m/12, time.Month(m%12+1), 1, 0, 0, 0, 0, time.UTC)
		var n int64
		if err := db.Raw("SELECT count(*) FROM (SELECT 1 FROM readings_hourly WHERE hour >= ? AND hour < ? LIMIT 1) x",
			s.timeArg(start.Add(-time.Hour)), s.timeArg(start.AddDate(0, 1, 0))).Scan(&n).Error; err != nil {
			return fmt.Errorf("look for roll-ups of %s: %w", start.Format("2006-01"), translate(err))
		}
		if n > 0 {
			rolled = append(rolled, m)
		}
	}
	if len(rolled) == 0 {
		return nil
	}
	type span struct{ lo, hi time.Time }
	spans := map[int64]span{}
	for _, g := range p.good {
		if !slices.Contains(rolled, monthOf(g.at)) {
			continue
		}
		sp, ok := spans[g.driveID]
		if !ok || g.at.Before(sp.lo) {
			sp.lo = g.at
		}
		if !ok || g.at.After(sp.hi) {
			sp.hi = g.at
		}
		spans[g.driveID] = sp
	}
	hours := map[int64][]int64{} // drive → rolled-up hours (Unix seconds), ascending
	for drive, sp := range spans {
		rows, err := db.Raw("SELECT hour FROM readings_hourly WHERE drive_id = ? AND hour >= ? AND hour < ? ORDER BY hour",
			drive, s.timeArg(sp.lo.Add(-time.Hour)), s.timeArg(sp.hi)).Rows()
		if err != nil {
			return fmt.Errorf("roll-ups of drive %d: %w", drive, translate(err))
		}
		for rows.Next() {
			var h dbTime
			if err := rows.Scan(&h); err != nil {
				rows.Close()
				return fmt.Errorf("scan roll-up hour: %w", err)
			}
			hours[drive] = append(hours[drive], h.T.Unix())
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return fmt.Errorf("roll-ups of drive %d: %w", drive, translate(err))
		}
	}
	kept := p.good[:0]
	for _, g := range p.good {
		hs := hours[g.driveID]
		// The aggregate of hour h covers readings with h < at ≤ h + 1 h.
		at := g.at.UnixMicro()
		i := sort.Search(len(hs), func(i int) bool { return hs[i]*1e6 >= at })
		if i > 0 && at <= (hs[i-1]+3600)*1e6 {
			flag(g.idx, "at", "falls in an hour kept only as an hourly aggregate (readings older than the raw retention are rolled up); it can no longer be added")
			continue
		}
		kept = append(kept, g)
	}
	p.good = kept
	return nil
}

// keyIndex returns the map from a good row's natural key to its index in
// good.
func (p *ingestPlan) keyIndex() map[readingKey]int {
	if p.byKey == nil {
		p.byKey = make(map[readingKey]int, len(p.good))
		for j, g := range p.good {
			p.byKey[readingKey{g.driveID, g.at.UnixMicro()}] = j
		}
	}
	return p.byKey
}

// refuse returns the validation error of a plan with bad rows and no
// Partial option, or nil.
func (p *ingestPlan) refuse(opts IngestOptions) error {
	if len(p.bad) == 0 || opts.Partial {
		return nil
	}
	return &ValidationError{Fields: p.bad}
}

// positionSet holds the positions a batch names.
type positionSet struct {
	byID  map[int64]*ingestPosition
	byTag map[string][]*ingestPosition
}

// describe names a position for an error message.
func (p *ingestPosition) describe() string {
	return fmt.Sprintf("%q (site %q)", p.Tag, p.Site)
}

// resolution is the outcome of finding a row's position.
type resolution struct {
	ok            bool
	field, reason string
}

// resolve finds the row's position.
func (ps *positionSet) resolve(r *Reading, fixed *ingestPosition) (*ingestPosition, resolution) {
	if fixed != nil {
		switch {
		case r.Position != "" && r.Position != fixed.Tag:
			return nil, resolution{field: "position", reason: fmt.Sprintf("names %q, but the request is for position %s", r.Position, fixed.describe())}
		case r.Site != "" && r.Site != fixed.Site:
			return nil, resolution{field: "site", reason: fmt.Sprintf("names %q, but the request is for position %s", r.Site, fixed.describe())}
		case r.PositionID > 0 && r.PositionID != fixed.ID:
			return nil, resolution{field: "position_id", reason: fmt.Sprintf("is %d, but the request is for position %d", r.PositionID, fixed.ID)}
		}
		return fixed, resolution{ok: true}
	}
	if r.PositionID > 0 {
		p := ps.byID[r.PositionID]
		if p == nil {
			return nil, resolution{field: "position_id", reason: fmt.Sprintf("no position with id %d at any of your sites", r.PositionID)}
		}
		if (r.Position != "" && r.Position != p.Tag) || (r.Site != "" && r.Site != p.Site) {
			return nil, resolution{field: "position", reason: fmt.Sprintf("position id %d is %s", p.ID, p.describe())}
		}
		return p, resolution{ok: true}
	}
	if r.Position == "" {
		return nil, resolution{field: "position", reason: "is required"}
	}
	cands := ps.byTag[r.Position]
	if r.Site != "" {
		for _, c := range cands {
			if c.Site == r.Site {
				return c, resolution{ok: true}
			}
		}
		return nil, resolution{field: "position", reason: fmt.Sprintf("no position tagged %q at site %q among your sites", r.Position, r.Site)}
	}
	switch len(cands) {
	case 0:
		return nil, resolution{field: "position", reason: fmt.Sprintf("no position tagged %q at any of your sites", r.Position)}
	case 1:
		return cands[0], resolution{ok: true}
	}
	sites := make([]string, len(cands))
	for i, c := range cands {
		sites[i] = fmt.Sprintf("%q", c.Site)
	}
	return nil, resolution{field: "site", reason: fmt.Sprintf("is required: position tag %q is used at sites %s", r.Position, strings.Join(sites, ", "))}
}

// lookupPositions loads the positions the rows name (by tag or id, within
// the principal's sites) and their installation history with each drive's
// rated current: one query for the positions (two when rows name some by
// tag and some by id), one for the installations. Each list of tags or ids
// travels as one parameter (an array on PostgreSQL, a JSON array on
// SQLite), however long the batch.
func (s *Store) lookupPositions(ctx context.Context, db *gorm.DB, rows []Reading, fixedID int64) (*positionSet, error) {
	tagSet := map[string]struct{}{}
	idSet := map[int64]struct{}{}
	if fixedID > 0 {
		idSet[fixedID] = struct{}{}
	} else {
		for i := range rows {
			switch {
			case rows[i].PositionID > 0:
				idSet[rows[i].PositionID] = struct{}{}
			case rows[i].Position != "" && GoodText(rows[i].Position):
				tagSet[rows[i].Position] = struct{}{}
			}
		}
	}
	tags := make([]string, 0, len(tagSet))
	for t := range tagSet {
		tags = append(tags, t)
	}
	ids := make([]int64, 0, len(idSet))
	for id := range idSet {
		ids = append(ids, id)
	}
	conn := db.Statement.ConnPool
	ps := &positionSet{byID: map[int64]*ingestPosition{}, byTag: map[string][]*ingestPosition{}}
	principal := PrincipalFrom(ctx)
	loadPositions := func(list any, typ, column string) error {
		from, value, err := s.listJoin(typ)
		if err != nil {
			return err
		}
		arg, err := s.listArg(list)
		if err != nil {
			return err
		}
		q := "SELECT p.id, p.site_id, p.tag, s.name FROM " + from + " JOIN positions AS p ON p." + column + " = " + value +
			" JOIN sites AS s ON s.id = p.site_id"
		args := []any{arg}
		if !principal.AllSites() {
			sites, err := s.listArg(nonEmpty(principal.Sites))
			if err != nil {
				return err
			}
			q += " WHERE p.site_id " + s.inList()
			args = append(args, sites)
		}
		rs, err := conn.QueryContext(ctx, s.rebind(q), args...)
		if err != nil {
			return fmt.Errorf("look up positions: %w", translate(err))
		}
		defer rs.Close()
		for rs.Next() {
			p := &ingestPosition{}
			if err := rs.Scan(&p.ID, &p.SiteID, &p.Tag, &p.Site); err != nil {
				return fmt.Errorf("look up positions: %w", err)
			}
			if _, seen := ps.byID[p.ID]; !seen {
				ps.byID[p.ID] = p
				ps.byTag[p.Tag] = append(ps.byTag[p.Tag], p)
			}
		}
		if err := rs.Err(); err != nil {
			return fmt.Errorf("look up positions: %w", translate(err))
		}
		return nil
	}
	if len(tags) > 0 {
		if err := loadPositions(tags, "text", "tag"); err != nil {
			return nil, err
		}
	}
	if len(ids) > 0 {
		if err := loadPositions(ids, "bigint", "id"); err != nil {
			return nil, err
		}
	}
	for _, cands := range ps.byTag {
		slices.SortFunc(cands, func(a, b *ingestPosition) int { return strings.Compare(a.Site, b.Site) })
	}
	if len(ps.byID) == 0 {
		return ps, nil
	}

	found := make([]int64, 0, len(ps.byID))
	for id := range ps.byID {
		found = append(found, id)
	}
	foundArg, err := s.listArg(found)
	if err != nil {
		return nil, err
	}
	from, value, err := s.listJoin("bigint")
	if err != nil {
		return nil, err
	}
	rs, err := conn.QueryContext(ctx, s.rebind(`SELECT i.position_id, i.drive_id, i.installed_at, i.removed_at, m.normal_duty_current_a
		FROM `+from+` JOIN installations AS i ON i.position_id = `+value+`
		JOIN drives AS d ON d.id = i.drive_id JOIN drive_models AS m ON m.id = d.model_id`), foundArg)
	if err != nil {
		return nil, fmt.Errorf("look up installations: %w", translate(err))
	}
	defer rs.Close()
	for rs.Next() {
		var (
			st      stay
			removed sql.NullTime
		)
		if err := rs.Scan(&st.PositionID, &st.DriveID, &st.InstalledAt, &removed, &st.RatedA); err != nil {
			return nil, fmt.Errorf("look up installations: %w", err)
		}
		st.InstalledAt = utc(st.InstalledAt)
		if removed.Valid {
			r := utc(removed.Time)
			st.RemovedAt = &r
		}
		p := ps.byID[st.PositionID]
		p.stays = append(p.stays, st)
	}
	if err := rs.Err(); err != nil {
		return nil, fmt.Errorf("look up installations: %w", translate(err))
	}
	for _, p := range ps.byID {
		slices.SortFunc(p.stays, func(a, b stay) int { return a.InstalledAt.Compare(b.InstalledAt) })
	}
	return ps, nil
}

// inList is the condition that a value is in a list passed as one
// parameter (see listArg).
func (s *Store) inList() string {
	if s.dialect == Postgres {
		return "= ANY(?)"
	}
	return "IN (SELECT value FROM json_each(?))"
}

// listJoin returns a FROM item that turns a list passed as one parameter
// (see listArg) into rows, and the expression naming each value. Joining
// it lets the database look each value up by index, where a long
// "= ANY(array)" is tested element by element against every row.
func (s *Store) listJoin(typ string) (from, value string, err error) {
	switch typ {
	case "text", "bigint":
	default:
		return "", "", fmt.Errorf("no list of %s", typ)
	}
	if s.dialect == Postgres {
		return "unnest(?::" + typ + "[]) AS list(v)", "list.v", nil
	}
	return "json_each(?) AS list", "list.value", nil
}

// listArg passes a list as one parameter: an array on PostgreSQL, a JSON
// array on SQLite.
func (s *Store) listArg(list any) (any, error) {
	if s.dialect == Postgres {
		return list, nil
	}
	b, err := json.Marshal(list)
	if err != nil {
		return nil, fmt.Errorf("encode a lookup list: %w", err)
	}
	return string(b), nil
}

// nonEmpty keeps an IN list valid when a principal sees no site at all.
func nonEmpty(ids []int64) []int64 {
	if len(ids) == 0 {
		return []int64{0}
	}
	return ids
}

// monthOf numbers the UTC month of t: year*12 + month - 1.
func monthOf(t time.Time) int {
	t = t.UTC()
	return t.Year()*12 + int(t.Month()) - 1
}

// differingFields names the columns where the stored reading differs from
// the posted one.
func differingFields(stored *Reading, storedPosition int64, posted *Reading, postedPosition int64) []string {
	var out []string
	if storedPosition != postedPosition {
		out = append(out, "position_id")
	}
	sv, pv := stored.values(), posted.values()
	for i := range sv {
		a, b := sv[i], pv[i]
		if (a == nil) != (b == nil) || (a != nil && *a != *b) {
			out = append(out, readingValueNames[i])
		}
	}
	return out
}

// result assembles the answer from the write's counts.
func (p *ingestPlan) result(inserted int, conflicts []Conflict, opts IngestOptions) IngestResult {
	res := IngestResult{Inserted: inserted, AlreadyPresent: len(p.good) - inserted - len(conflicts), Conflicts: conflicts}
	if opts.Partial {
		res.Rejected = p.bad
	}
	slices.SortFunc(res.Conflicts, func(a, b Conflict) int { return a.Row - b.Row })
	return res
}

// conflict builds the report of a posted row whose key is stored with
// other values; stored is the row as the database holds it.
func (p *ingestPlan) conflict(key readingKey, stored *Reading, storedPosition int64) (Conflict, bool) {
	j, ok := p.keyIndex()[key]
	if !ok {
		return Conflict{}, false
	}
	g := p.good[j]
	posted := &p.rows[g.idx]
	fields := differingFields(stored, storedPosition, posted, g.positionID)
	if len(fields) == 0 {
		return Conflict{}, false
	}
	return Conflict{Row: rowNumber(p.rows, g.idx), Line: posted.Line, DriveID: g.driveID, At: g.at, Fields: fields}, true
}
