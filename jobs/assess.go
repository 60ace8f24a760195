// Package jobs owns kelvard's scheduled work and its orchestration: the
// assessment that turns readings into life estimates and findings, the
// planning run, retention, and the scheduler that runs each once across
// replicas.
package jobs

import (
	"context"
	"fmt"
	"log/slog"
	"math"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"golang.org/x/sync/errgroup"

	"kelvard/health"
	"kelvard/store"
)

// AssessConfig tunes the assessment. The zero value takes the defaults.
type AssessConfig struct {
	// Params are the models' parameters (health.DefaultDriveParams).
	Params *health.DriveParams
	// BatchSize is how many drives load and save together (default 100).
	BatchSize int
	// Workers is how many batches run at once (default 2).
	Workers int
	// WindowDays is the trailing window of the window checks (default
	// DefaultWindowDays).
	WindowDays int
	// TrendEvery is how often the window checks run for a drive that is
	// not recomputed (default 24 h): they cost a window of readings, the
	// life ledgers only the new ones.
	TrendEvery time.Duration
	// ReassessEvery is the longest a drive goes without an assessment, so
	// rules that depend on time alone are seen (default 1 h).
	ReassessEvery time.Duration
	// ResolveAfter is how long a cleared finding waits before it resolves
	// (default 24 h).
	ResolveAfter time.Duration
	// Notify queues a notification for every new critical finding.
	Notify bool
	// Now is the clock (default time.Now).
	Now func() time.Time
	// Log receives one line per run.
	Log *slog.Logger
}

// DefaultWindowDays is the default trailing window of the window checks.
const DefaultWindowDays = 90

func (c *AssessConfig) defaults() {
	if c.Params == nil {
		p := health.DefaultDriveParams()
		c.Params = &p
	}
	if c.BatchSize <= 0 {
		c.BatchSize = 100
	}
	if c.Workers <= 0 {
		c.Workers = 2
	}
	if c.WindowDays <= 0 {
		c.WindowDays = DefaultWindowDays
	}
	if c.TrendEvery <= 0 {
		c.TrendEvery = 24 * time.Hour
	}
	if c.ReassessEvery <= 0 {
		c.ReassessEvery = time.Hour
	}
	if c.ResolveAfter <= 0 {
		c.ResolveAfter = 24 * time.Hour
	}
	if c.Now == nil {
		c.Now = time.Now
	}
	if c.Log == nil {
		c.Log = slog.New(slog.DiscardHandler)
	}
}

// Assessor runs assessments against a store.
type Assessor struct {
	store *store.Store
	cfg   AssessConfig
	// mu makes runs in one process take turns; across replicas the
	// scheduler's claim does the same.
	mu sync.Mutex
}

// NewAssessor returns an assessor over st.
func NewAssessor(st *store.Store, cfg AssessConfig) *Assessor {
	cfg.defaults()
	return &Assessor{store: st, cfg: cfg}
}

// AssessOptions select what one run does.
type AssessOptions struct {
	// Full recomputes every drive from its components' start.
	Full bool
	// DriveIDs limits the run to these drives (all candidates when empty).
	DriveIDs []int64
	// Progress, when set, is told drives done out of total after each batch.
	Progress func(done, total int)
}

// AssessSummary reports one run.
type AssessSummary struct {
	At         time.Time     `json:"at"`
	Drives     int64         `json:"drives"`
	Readings   int64         `json:"readings"`
	Recomputed int64         `json:"recomputed"`
	Took       time.Duration `json:"took"`
}

// Assess runs one assessment: it picks the drives with new readings,
// marks or stale results (all drives with Full), advances their life
// ledgers by the new readings only (or replays a drive's history when it
// must be recomputed), runs the models and saves states, results and
// findings batch by batch, each batch in one transaction.
func (a *Assessor) Assess(ctx context.Context, opts AssessOptions) (AssessSummary, error) {
	a.mu.Lock()
	defer a.mu.Unlock()
	start := time.Now()
	at := a.cfg.Now().UTC().Truncate(time.Second)
	sum := AssessSummary{At: at}
	ids := opts.DriveIDs
	if len(ids) == 0 {
		var err error
		ids, err = a.store.AssessmentCandidates(ctx, opts.Full, at.Add(-a.cfg.ReassessEvery))
		if err != nil {
			return sum, err
		}
	}
	var done atomic.Int64
	var progressMu sync.Mutex
	report := func(n int) {
		d := done.Add(int64(n))
		if opts.Progress != nil {
			progressMu.Lock()
			opts.Progress(int(d), len(ids))
			progressMu.Unlock()
		}
	}
	report(0)
	g, gctx := errgroup.WithContext(ctx)
	g.SetLimit(a.cfg.Workers)
	var readings, recomputed atomic.Int64
	for batch := range slices.Chunk(ids, a.cfg.BatchSize) {
		g.Go(func() error {
			n, r, err := a.assessBatch(gctx, at, batch, opts.Full)
			if err != nil {
				return err
			}
			readings.Add(n)
			recomputed.Add(r)
			report(len(batch))
			return nil
		})
	}
	err := g.Wait()
	sum.Drives, sum.Readings, sum.Recomputed, sum.Took = done.Load(), readings.Load(), recomputed.Load(), time.Since(start)
	if err != nil {
		return sum, fmt.Errorf("assess: %w", err)
	}
	a.cfg.Log.Info("assessment done", slog.Int64("drives", sum.Drives), slog.Int64("readings", sum.Readings),
		slog.Int64("recomputed", sum.Recomputed), slog.Duration("took", sum.Took))
	return sum, nil
}

// reading is one scanned reading with its position and exact time.
type reading struct {
	position int64
	at       time.Time
	sample   health.Sample
}

// drivePlan is what one drive's assessment will do in this run.
type drivePlan struct {
	c         *store.AssessContext
	full      bool
	trend     bool
	scan      bool
	scanAfter time.Time
	ratings   health.Ratings
	capSpec   health.CapacitorSpec
	fanSpec   health.FanSpec
	positions map[int64]positionSetup
	hash      string
	capStart  time.Time
	fanStart  time.Time
	storageC  float64
	// params are the models' parameters with the site, area and model
	// overrides applied.
	params health.DriveParams
}

// assessBatch assesses one batch of drives and saves it; it returns the
// readings taken in and the drives recomputed.
func (a *Assessor) assessBatch(ctx context.Context, at time.Time, ids []int64, full bool) (int64, int64, error) {
	windowFrom := at.AddDate(0, 0, -a.cfg.WindowDays)
	ctxs, err := a.store.LoadAssessContexts(ctx, ids, windowFrom)
	if err != nil {
		return 0, 0, err
	}
	plans := make(map[int64]*drivePlan, len(ctxs))
	var from []store.ScanFrom
	var recomputed int64
	for _, c := range ctxs {
		pl, err := a.plan(c, at, full)
		if err != nil {
			return 0, 0, fmt.Errorf("drive %s: %w", c.Drive.Serial, err)
		}
		plans[c.Drive.ID] = pl
		if pl.full {
			recomputed++
		}
		if pl.scan {
			f := store.ScanFrom{DriveID: c.Drive.ID, After: pl.scanAfter}
			if pl.full {
				// Older readings feed only the life ledgers.
				f.Whole, f.NarrowBefore = true, windowFrom
				if c.State != nil {
					// The last pass's count says how long it is.
					f.Expect = max(c.State.CapacitorState.Samples, c.State.FanState.Samples)
				}
			}
			from = append(from, f)
		}
	}
	// Drives replayed in full also need the hourly roll-ups of readings
	// past the raw retention.
	rolled := map[int64][]store.HourlyReading{}
	var fullFrom []store.ScanFrom
	for _, c := range ctxs {
		if pl := plans[c.Drive.ID]; pl.full && c.Drive.Status != health.StatusRetired {
			fullFrom = append(fullFrom, store.ScanFrom{DriveID: c.Drive.ID, After: minTime(pl.capStart, pl.fanStart)})
		}
	}
	if err := a.store.ScanHourly(ctx, fullFrom, func(h store.HourlyReading) error {
		rolled[h.DriveID] = append(rolled[h.DriveID], h)
		return nil
	}); err != nil {
		return 0, 0, err
	}
	var (
		results  []store.AssessResult
		buf      []reading
		curID    int64
		finished = map[int64]bool{}
		total    int64
	)
	flush := func() error {
		if curID == 0 {
			return nil
		}
		res, err := a.finish(plans[curID], buf, rolled[curID], at)
		if err != nil {
			return fmt.Errorf("drive %s: %w", plans[curID].c.Drive.Serial, err)
		}
		results = append(results, res)
		finished[curID] = true
		buf = buf[:0]
		return nil
	}
	err = a.store.ScanReadings(ctx, from, func(driveID, positionID int64, t time.Time, s health.Sample) error {
		if driveID != curID {
			if err := flush(); err != nil {
				return err
			}
			curID = driveID
		}
		total++
		buf = append(buf, reading{position: positionID, at: t, sample: s})
		return nil
	})
	if err != nil {
		return 0, 0, err
	}
	if err := flush(); err != nil {
		return 0, 0, err
	}
	for _, c := range ctxs {
		if !finished[c.Drive.ID] {
			res, err := a.finish(plans[c.Drive.ID], nil, rolled[c.Drive.ID], at)
			if err != nil {
				return 0, 0, fmt.Errorf("drive %s: %w", c.Drive.Serial, err)
			}
			results = append(results, res)
		}
	}
	err = a.store.SaveAssessments(ctx, results, store.SaveOptions{ResolveAfter: a.cfg.ResolveAfter, Notify: a.cfg.Notify})
	return total, recomputed, err
}

// plan decides whether a drive is recomputed or advanced, whether the
// window checks run, and which readings to scan.
func (a *Assessor) plan(c *store.AssessContext, at time.Time, full bool) (*drivePlan, error) {
	m := c.Model
	pl := &drivePlan{c: c, ratings: ratingsOf(m), capSpec: capacitorSpecOf(m), fanSpec: fanSpecOf(m),
		positions: map[int64]positionSetup{}, storageC: storageTempC(c)}
	if c.Drive.Status == health.StatusRetired {
		return pl, nil
	}
	layers := []store.Parameters{c.Site.Parameters}
	if pc, ok := c.Current(); ok {
		layers = []store.Parameters{pc.Site.Parameters, pc.Area.Parameters}
	} else if c.StoresArea != nil {
		layers = append(layers, c.StoresArea.Parameters)
	}
	params, err := store.ResolveParams(*a.cfg.Params, append(layers, m.Parameters)...)
	if err != nil {
		return nil, err
	}
	pl.params = params
	pl.capStart, pl.fanStart = c.Drive.ManufacturedAt, c.Drive.ManufacturedAt
	var capID, fanID *int64
	if c.Capacitor != nil {
		pl.capStart, capID = c.Capacitor.InstalledAt, &c.Capacitor.ID
	}
	if c.Fan != nil {
		pl.fanStart, fanID = c.Fan.InstalledAt, &c.Fan.ID
	}
	type segment struct {
		Position int64
		From, To int64
		FillC    float64
		Cabinet  *health.Cabinet
	}
	var segs []segment
	for _, in := range c.Installations {
		ps, ok := pl.positions[in.PositionID]
		if !ok {
			var err error
			if ps, err = setupPosition(c.Positions[in.PositionID], m, pl.ratings, pl.params); err != nil {
				return nil, err
			}
			pl.positions[in.PositionID] = ps
		}
		seg := segment{Position: in.PositionID, From: in.InstalledAt.Unix(), FillC: ps.fillC, Cabinet: ps.input.Cabinet}
		if in.RemovedAt != nil {
			seg.To = in.RemovedAt.Unix()
		}
		segs = append(segs, seg)
	}
	p := pl.params
	pl.hash = paramsHash(pl.ratings, pl.capSpec, pl.fanSpec, capID, pl.capStart.Unix(), fanID, pl.fanStart.Unix(),
		segs, pl.storageC, p.Capacitor, p.Fan, c.Drive.Status)

	st := c.State
	pl.full = full || st == nil || c.RecomputeFrom != nil || st.ParamsHash != pl.hash ||
		(c.Drive.PositionID != nil && st.CapacitorState.Samples == 0) ||
		!slices.Equal(ptrSlice(st.CapacitorComponentID), ptrSlice(capID)) || !slices.Equal(ptrSlice(st.FanComponentID), ptrSlice(fanID))
	pl.trend = pl.full || st.TrendAt == nil || at.Sub(*st.TrendAt) >= a.cfg.TrendEvery
	if c.Drive.PositionID == nil {
		pl.trend = false // window checks are about a position
	}
	switch {
	case pl.full:
		pl.scan, pl.scanAfter = true, minTime(pl.capStart, pl.fanStart).Add(-time.Microsecond)
	case c.AssessedTo != nil && c.LatestReadingAt != nil && c.LatestReadingAt.After(*c.AssessedTo):
		pl.scan, pl.scanAfter = true, *c.AssessedTo
	case c.AssessedTo == nil && c.LatestReadingAt != nil:
		pl.scan, pl.scanAfter = true, minTime(pl.capStart, pl.fanStart).Add(-time.Microsecond)
	}
	if pl.trend {
		wf := at.AddDate(0, 0, -a.cfg.WindowDays)
		if !pl.scan || wf.Before(pl.scanAfter) {
			pl.scanAfter = wf
		}
		pl.scan = c.LatestReadingAt != nil
	}
	return pl, nil
}

func ptrSlice(p *int64) []int64 {
	if p == nil {
		return nil
	}
	return []int64{*p}
}

func minTime(a, b time.Time) time.Time {
	if b.Before(a) {
		return b
	}
	return a
}

// finish advances the drive's ledgers with its readings, runs the models
// and builds the result to save.
func (a *Assessor) finish(pl *drivePlan, rs []reading, hs []store.HourlyReading, at time.Time) (store.AssessResult, error) {
	c := pl.c
	res := store.AssessResult{DriveID: c.Drive.ID, SiteID: c.Drive.SiteID, Existing: c.Findings, RecomputeSeen: c.RecomputeFrom}
	if c.Drive.Status == health.StatusRetired {
		res.Retired = true
		res.Assessment.At = at.Unix()
		return res, nil
	}
	p := pl.params
	var (
		capSt health.CapacitorState
		fanSt health.FanState
		err   error
	)
	prev := c.State
	var unobs [2]float64
	if pl.full {
		capSt, fanSt, unobs, err = a.replay(pl, rs, hs, at)
	} else {
		capSt, fanSt, err = a.advance(pl, rs, at)
		unobs = [2]float64{prev.UnobservedCapacitorH, prev.UnobservedFanH}
	}
	if err != nil {
		return res, err
	}

	state := store.DriveState{CapacitorState: capSt, FanState: fanSt, ParamsHash: pl.hash,
		UnobservedCapacitorH: unobs[0], UnobservedFanH: unobs[1]}
	if c.Capacitor != nil {
		state.CapacitorComponentID = &c.Capacitor.ID
	}
	if c.Fan != nil {
		state.FanComponentID = &c.Fan.ID
	}
	// The closed days as stored, so the save writes only what changed.
	state.CarryStored(prev)
	if prev != nil && !pl.full {
		state.Measured, state.TrendAt = prev.Measured, prev.TrendAt
	}

	in := health.DriveInput{At: at.Unix(), Ratings: pl.ratings, Capacitor: pl.capSpec, Fan: pl.fanSpec,
		CapacitorState: capSt, FanState: fanSt, Measured: state.Measured, Params: p}
	if fill, ok := pl.lastFillC(); ok {
		// With no reading yet, unseen service is charged at the
		// conservative fill: design-point air, full rated ripple.
		in.CapacitorUnobserved = health.Unobserved{Hours: unobs[0],
			FallbackRatePerH: 1 / pl.capSpec.LifeH(pl.capSpec.CoreTempC(fill, pl.capSpec.RippleRefCurrentA))}
		in.FanUnobserved = health.Unobserved{Hours: unobs[1], FallbackRatePerH: 1 / pl.fanSpec.LifeH(fill)}
	}
	if c.Capacitor != nil {
		in.CapacitorInitial = health.CapacitorInitial{CapacitanceUF: nanIfZero(c.Capacitor.InitialCapacitanceUF),
			ESRMilliohm: nanIfZero(c.Capacitor.InitialESRMilliohm)}
	}
	for _, f := range c.Findings {
		in.Previous = append(in.Previous, f.Health())
		if f.Status == store.FindingSuppressed && f.SuppressedUntil != nil && at.Before(*f.SuppressedUntil) {
			in.Suppressed = append(in.Suppressed, f.Rule)
		}
	}
	for _, e := range c.Events {
		in.Events = append(in.Events, health.Event{At: e.At.Unix(), Type: e.Type, Cause: e.TripCause, State: e.State})
	}
	if pc, ok := c.Current(); ok {
		ps := pl.positions[pc.Position.ID]
		pos := ps.input
		res.PositionID, res.AreaID = &pc.Position.ID, &pc.Area.ID
		if c.LatestReadingAt != nil {
			pos.LastReadingAt, pos.HasReadings = c.LatestReadingAt.Unix(), true
		}
		if c.LatestReadingAt == nil || c.LatestReadingAt.Before(currentSince(c)) {
			pos.HasReadings = false // nothing since the drive came to this position
		}
		in.Position = &pos
		if pl.trend {
			since := currentSince(c)
			wf := at.AddDate(0, 0, -a.cfg.WindowDays)
			in.Window = make([]health.Sample, 0, len(rs))
			for _, r := range rs {
				if r.position == pc.Position.ID && !r.at.Before(since) && !r.at.Before(wf) {
					in.Window = append(in.Window, r.sample)
				}
			}
			t := at
			state.TrendAt = &t
		}
	} else if c.Drive.LastEnergisedAt != nil {
		in.LastEnergisedAt = c.Drive.LastEnergisedAt.Unix()
	} else if len(c.Installations) == 0 {
		in.LastEnergisedAt = c.Drive.ManufacturedAt.Unix()
	}
	out, err := health.AssessDrive(in)
	if err != nil {
		return res, err
	}
	if pl.trend {
		state.Measured = out.Measured
	}
	res.Assessment = out
	res.State = state
	res.SaveState = pl.full || len(rs) > 0 || pl.trend || c.Drive.PositionID == nil || prev == nil || prev.ParamsHash != pl.hash
	res.AssessedTo = c.AssessedTo
	if n := len(rs); n > 0 && (res.AssessedTo == nil || rs[n-1].at.After(*res.AssessedTo)) {
		t := rs[n-1].at
		res.AssessedTo = &t
	}
	if res.AssessedTo == nil {
		// Nothing read yet: the watermark starts where the ledger does.
		t := minTime(pl.capStart, pl.fanStart)
		res.AssessedTo = &t
	}
	if !pl.full && c.AssessedTo != nil {
		after := *c.AssessedTo
		res.ScannedAfter = &after
		for _, r := range rs {
			if r.at.After(after) {
				res.Scanned++
			}
		}
	}
	return res, nil
}

// lastFillC is the fill temperature of the position the drive stood at
// last, if it ever stood at one.
func (pl *drivePlan) lastFillC() (float64, bool) {
	ins := pl.c.Installations
	if len(ins) == 0 {
		return 0, false
	}
	ps, ok := pl.positions[ins[len(ins)-1].PositionID]
	return ps.fillC, ok
}

// currentSince is when the drive came to its current position.
func currentSince(c *store.AssessContext) time.Time {
	for i := len(c.Installations) - 1; i >= 0; i-- {
		if in := c.Installations[i]; in.RemovedAt == nil {
			return in.InstalledAt
		}
	}
	return c.Drive.ManufacturedAt
}

func nanIfZero(v float64) float64 {
	if v == 0 {
		return math.NaN()
	}
	return v
}

// ledgerFrom starts a ledger at a component's fitting time, so the time
// from then to the first reading is accounted for (as storage or as an
// unobserved gap) rather than lost.
func ledgerFrom(t time.Time) health.LifeLedger {
	return health.LifeLedger{HasLast: true, LastAt: t.Unix(), FirstAt: t.Unix()}
}

// replay rebuilds both ledgers from the components' fitting: stored
// periods age the capacitors at the storage temperature (the fan stands
// still), installed periods take the readings of that position, and the
// unobserved end of an installation is filled as a gap.
func (a *Assessor) replay(pl *drivePlan, rs []reading, hs []store.HourlyReading, at time.Time) (health.CapacitorState, health.FanState, [2]float64, error) {
	c := pl.c
	p := pl.params
	capSt := health.CapacitorState{LifeLedger: ledgerFrom(pl.capStart)}
	fanSt := health.FanState{LifeLedger: ledgerFrom(pl.fanStart)}
	var err error
	capOps := ledgerOps{
		last:    func() int64 { return capSt.LastAt },
		seen:    func() bool { return capSt.Samples > 0 },
		restart: func() { capSt.HasLast = false },
		skip:    func(to int64) { capSt.HasLast, capSt.LastAt = true, max(capSt.LastAt, to) },
		stored: func(from, to int64) error {
			capSt, err = health.AddStoredCapacitorPeriod(pl.capSpec, capSt, from, to, pl.storageC)
			return err
		},
		accumulate: func(ps positionSetup, samples []health.Sample) error {
			cp := p.Capacitor
			cp.Interval.FillAirC = ps.fillC
			capSt, _, err = health.AccumulateCapacitor(pl.capSpec, cp, capSt, samples, airOf(ps, samples))
			return err
		},
		rolled: func(ps positionSetup, aggs []health.HourAggregate) error {
			cp := p.Capacitor
			cp.Interval.FillAirC = ps.fillC
			capSt, _, err = health.AccumulateCapacitorAggregates(pl.capSpec, cp, capSt, aggs)
			return err
		},
	}
	fanOps := ledgerOps{
		last:    func() int64 { return fanSt.LastAt },
		seen:    func() bool { return fanSt.Samples > 0 },
		restart: func() { fanSt.HasLast = false },
		skip:    func(to int64) { fanSt.HasLast, fanSt.LastAt = true, max(fanSt.LastAt, to) },
		stored: func(from, to int64) error {
			fanSt.LastAt = max(fanSt.LastAt, to) // a stored fan stands still
			return nil
		},
		accumulate: func(ps positionSetup, samples []health.Sample) error {
			fp := p.Fan
			fp.Interval.FillAirC = ps.fillC
			fanSt, _, err = health.AccumulateFan(pl.fanSpec, fp, fanSt, samples, airOf(ps, samples))
			return err
		},
		rolled: func(ps positionSetup, aggs []health.HourAggregate) error {
			fp := p.Fan
			fp.Interval.FillAirC = ps.fillC
			fanSt, _, err = health.AccumulateFanAggregates(pl.fanSpec, fp, fanSt, aggs)
			return err
		},
	}
	var unobs [2]float64
	if unobs[0], err = walk(c, pl, rs, hs, at, pl.capStart.Unix(), capOps); err != nil {
		return capSt, fanSt, unobs, fmt.Errorf("capacitor life: %w", err)
	}
	if unobs[1], err = walk(c, pl, rs, hs, at, pl.fanStart.Unix(), fanOps); err != nil {
		return capSt, fanSt, unobs, fmt.Errorf("fan life: %w", err)
	}
	return capSt, fanSt, unobs, nil
}

// ledgerOps are the steps walk takes on one ledger.
type ledgerOps struct {
	last       func() int64
	stored     func(from, to int64) error
	accumulate func(ps positionSetup, samples []health.Sample) error
	// rolled takes hourly roll-ups of readings past the raw retention.
	rolled func(ps positionSetup, aggs []health.HourAggregate) error
	// seen reports whether the ledger has taken a reading; restart makes
	// the next reading start the clock; skip moves the clock on without
	// ageing the part.
	seen    func() bool
	restart func()
	skip    func(to int64)
}

// walk replays one ledger from start to at through the drive's
// installation history and returns the installed hours no reading covers
// before the ledger's first reading. Those are charged later at the
// observed rate (health.LifeReport.WithUnobserved); after the first
// reading, a long interval without readings is a gap, filled
// conservatively by the models.
func walk(c *store.AssessContext, pl *drivePlan, rs []reading, hs []store.HourlyReading, at time.Time, start int64, ops ledgerOps) (float64, error) {
	maxGapS := pl.params.Capacitor.Interval.MaxGapS
	cursor := start
	unobserved := 0.0
	i, ia := 0, 0
	for i < len(rs) && rs[i].sample.At <= start {
		i++
	}
	for ia < len(hs) && hs[ia].Agg.LastAt <= start {
		ia++
	}
	now := at.Unix()
	installedNow := false
	for _, in := range c.Installations {
		from := in.InstalledAt.Unix()
		to := int64(math.MaxInt64)
		if in.RemovedAt != nil {
			to = in.RemovedAt.Unix()
		}
		if to <= cursor {
			continue
		}
		if from > cursor {
			if err := ops.stored(cursor, from); err != nil {
				return 0, err
			}
			cursor = from
		}
		j := i
		for j < len(rs) && rs[j].sample.At <= to {
			j++
		}
		ja := ia
		for ja < len(hs) && hs[ja].Agg.LastAt <= to {
			ja++
		}
		end := min(to, now)
		if !ops.seen() {
			// Installed service before the ledger's first reading: a
			// lead-in no longer than the gap limit is an ordinary
			// interval; anything longer is unobserved history.
			first, has := int64(0), false
			switch {
			case ja > ia:
				first, has = hs[ia].Agg.FirstAt, true
			case j > i:
				first, has = rs[i].sample.At, true
			}
			switch {
			case !has:
				unobserved += float64(max(end-cursor, 0)) / 3600
				ops.skip(end)
			case first-cursor > maxGapS:
				unobserved += float64(first-cursor) / 3600
				ops.restart()
			default:
				ops.skip(cursor)
			}
		}
		if ja > ia {
			aggs := make([]health.HourAggregate, ja-ia)
			for k := range aggs {
				aggs[k] = hs[ia+k].Agg
			}
			if err := ops.rolled(pl.positions[in.PositionID], aggs); err != nil {
				return 0, err
			}
		}
		ia = ja
		if j > i {
			samples := make([]health.Sample, j-i)
			for k := range samples {
				samples[k] = rs[i+k].sample
			}
			if err := ops.accumulate(pl.positions[in.PositionID], samples); err != nil {
				return 0, err
			}
		}
		i = j
		if in.RemovedAt == nil {
			installedNow = true
			cursor = now
			break
		}
		if ops.seen() && ops.last() < to {
			// Installed but unobserved until removal: fill it.
			if err := ops.accumulate(pl.positions[in.PositionID], []health.Sample{blankSample(to)}); err != nil {
				return 0, err
			}
		}
		cursor = to
	}
	if !installedNow && cursor < now {
		return unobserved, ops.stored(cursor, now)
	}
	return unobserved, nil
}

// advance moves both ledgers on by the new readings only (an installed
// drive) or by the time in stores since the last run.
func (a *Assessor) advance(pl *drivePlan, rs []reading, at time.Time) (health.CapacitorState, health.FanState, error) {
	c := pl.c
	p := pl.params
	capSt, fanSt := c.State.CapacitorState, c.State.FanState
	pc, installed := c.Current()
	if !installed {
		var err error
		if now := at.Unix(); now > capSt.LastAt {
			if capSt, err = health.AddStoredCapacitorPeriod(pl.capSpec, capSt, capSt.LastAt, now, pl.storageC); err != nil {
				return capSt, fanSt, err
			}
		}
		fanSt.LastAt = max(fanSt.LastAt, at.Unix())
		return capSt, fanSt, nil
	}
	ps := pl.positions[pc.Position.ID]
	var err error
	if samples := newer(rs, capSt.LastAt); len(samples) > 0 {
		cp := p.Capacitor
		cp.Interval.FillAirC = ps.fillC
		if capSt, _, err = health.AccumulateCapacitor(pl.capSpec, cp, capSt, samples, airOf(ps, samples)); err != nil {
			return capSt, fanSt, err
		}
	}
	if samples := newer(rs, fanSt.LastAt); len(samples) > 0 {
		fp := p.Fan
		fp.Interval.FillAirC = ps.fillC
		if fanSt, _, err = health.AccumulateFan(pl.fanSpec, fp, fanSt, samples, airOf(ps, samples)); err != nil {
			return capSt, fanSt, err
		}
	}
	return capSt, fanSt, nil
}

// newer returns the samples after a ledger's last reading.
func newer(rs []reading, last int64) []health.Sample {
	var out []health.Sample
	for _, r := range rs {
		if r.sample.At > last {
			out = append(out, r.sample)
		}
	}
	return out
}

// airOf gives the models the cabinet's estimate of internal air for each
// reading, when the drive stands in a cabinet.
func airOf(ps positionSetup, samples []health.Sample) health.LifeAirInputs {
	if ps.cabinet == nil {
		return health.LifeAirInputs{}
	}
	est := make([]float64, len(samples))
	for i, s := range samples {
		est[i] = ps.cabinet.EstimateInternalAirC(s)
	}
	return health.LifeAirInputs{InternalC: est}
}

// blankSample is a reading with nothing logged: the models fill its
// interval conservatively.
func blankSample(at int64) health.Sample {
	n := math.NaN()
	return health.Sample{At: at, InternalAirC: n, AmbientC: n, HeatsinkC: n, CurrentA: n, PeakCurrentA: n, FrequencyHz: n,
		BusV: n, BusRippleV: n, CapacitanceUF: n, ESRMilliohm: n}
}

// AssessJob runs the assessment under the scheduler.
type AssessJob struct {
	Assessor *Assessor
	// Full recomputes every drive (the CLI's --full).
	Full bool
	// Notifier, when set, posts new critical findings after each run.
	Notifier *Notifier
}

// Name implements Job.
func (j AssessJob) Name() string { return Assess }

// Run implements Job.
func (j AssessJob) Run(ctx context.Context, _ time.Time, progress func(done, total int)) (Stats, error) {
	sum, err := j.Assessor.Assess(ctx, AssessOptions{Full: j.Full, Progress: progress})
	st := Stats{Drives: sum.Drives, Readings: sum.Readings,
		Note: fmt.Sprintf("%d drives, %d readings, %d recomputed", sum.Drives, sum.Readings, sum.Recomputed)}
	if err != nil {
		return st, err
	}
	if j.Notifier != nil {
		if _, err := j.Notifier.DeliverDue(ctx); err != nil {
			j.Assessor.cfg.Log.Warn("webhook delivery", slog.Any("err", err))
		}
	}
	return st, nil
}
