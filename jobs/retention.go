package jobs

import (
	"context"
	"fmt"
	"log/slog"
	"math"
	"slices"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// RetentionConfig tunes the retention job.
type RetentionConfig struct {
	// RawRetention is how long raw readings are kept before they are rolled
	// up into hourly aggregates (default 400 days). It must exceed the
	// assessment's window (90 days by default), which works on raw readings.
	RawRetention time.Duration
	// Params are the models' parameters (for the roll-up's gap rule).
	Params *health.DriveParams
	// KeepJobRuns is how long job run records are kept (default 90 days).
	KeepJobRuns time.Duration
	Now         func() time.Time
	Log         *slog.Logger
}

// RetentionJob keeps the readings table to a bounded size: every whole
// month of raw readings older than the raw retention, once every reading
// in it has been assessed, is rolled up into hourly aggregates that keep
// min, mean and max per field, time-at-temperature bins and the moments of
// current (so capacitor and fan life can still be recomputed, within 0.1 %
// of the raw result), and the month's raw rows are then dropped (a whole
// partition on PostgreSQL). It also makes the coming months' partitions and
// prunes old job records.
type RetentionJob struct {
	store *store.Store
	cfg   RetentionConfig
}

// NewRetentionJob returns the retention job over st.
func NewRetentionJob(st *store.Store, cfg RetentionConfig) *RetentionJob {
	if cfg.RawRetention <= 0 {
		cfg.RawRetention = 400 * 24 * time.Hour
	}
	if cfg.Params == nil {
		p := health.DefaultDriveParams()
		cfg.Params = &p
	}
	if cfg.KeepJobRuns <= 0 {
		cfg.KeepJobRuns = 90 * 24 * time.Hour
	}
	if cfg.Now == nil {
		cfg.Now = time.Now
	}
	if cfg.Log == nil {
		cfg.Log = slog.New(slog.DiscardHandler)
	}
	return &RetentionJob{store: st, cfg: cfg}
}

// Name implements Job.
func (j *RetentionJob) Name() string { return Retention }

// Run implements Job.
func (j *RetentionJob) Run(ctx context.Context, _ time.Time, progress func(done, total int)) (Stats, error) {
	now := j.cfg.Now().UTC()
	if err := j.store.PrepareReadingPartitions(ctx); err != nil {
		return Stats{}, err
	}
	months, err := j.store.RawMonths(ctx, now.Add(-j.cfg.RawRetention))
	if err != nil {
		return Stats{}, err
	}
	var st Stats
	rolled, waiting := 0, 0
	for i, m := range months {
		if progress != nil {
			progress(i, len(months))
		}
		ok, err := j.store.MonthAssessed(ctx, m)
		if err != nil {
			return st, err
		}
		if !ok {
			// Nothing is rolled up before it has been assessed; the next
			// run tries again.
			waiting++
			continue
		}
		drives, readings, err := j.rollMonth(ctx, m)
		if err != nil {
			return st, fmt.Errorf("roll up %s: %w", m.Start.Format("2006-01"), err)
		}
		st.Drives += drives
		st.Readings += readings
		rolled++
	}
	if n, err := j.store.PruneJobRuns(ctx, now.Add(-j.cfg.KeepJobRuns)); err != nil {
		return st, err
	} else if n > 0 {
		j.cfg.Log.Info("job runs pruned", slog.Int64("runs", n))
	}
	st.Note = fmt.Sprintf("%d month(s) rolled up, %d waiting for assessment", rolled, waiting)
	return st, nil
}

// rollMonth rolls one month up drive by drive and saves it.
func (j *RetentionJob) rollMonth(ctx context.Context, m store.RollupMonth) (int64, int64, error) {
	prev, err := j.store.MonthDrives(ctx, m)
	if err != nil {
		return 0, 0, err
	}
	ids := make([]int64, 0, len(prev))
	for id := range prev {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	ctxs, err := j.store.LoadAssessContexts(ctx, ids, m.Start)
	if err != nil {
		return 0, 0, err
	}
	var hours []store.HourlyReading
	var readings int64
	for _, c := range ctxs {
		var rs []reading
		err := j.store.ScanReadings(ctx, []store.ScanFrom{{DriveID: c.Drive.ID, After: m.Start.Add(-time.Microsecond), Before: m.End}},
			func(_, positionID int64, t time.Time, s health.Sample) error {
				rs = append(rs, reading{position: positionID, at: t, sample: s})
				return nil
			})
		if err != nil {
			return 0, 0, err
		}
		readings += int64(len(rs))
		hs, err := j.rollDrive(c, prev[c.Drive.ID], rs)
		if err != nil {
			return 0, 0, fmt.Errorf("drive %s: %w", c.Drive.Serial, err)
		}
		hours = append(hours, hs...)
	}
	if err := j.store.SaveRollup(ctx, m, hours); err != nil {
		return 0, 0, err
	}
	return int64(len(ctxs)), readings, nil
}

// rollDrive builds one drive's hourly aggregates for a month of readings.
// The air each reading stands for is the one the life models use: the
// logged internal air, else the cabinet model's estimate, else ambient.
func (j *RetentionJob) rollDrive(c *store.AssessContext, prev time.Time, rs []reading) ([]store.HourlyReading, error) {
	if len(rs) == 0 {
		return nil, nil
	}
	ratings := ratingsOf(c.Model)
	fan := fanSpecOf(c.Model)
	setups := map[int64]positionSetup{}
	samples := make([]health.Sample, len(rs))
	est := make([]float64, len(rs))
	for i, r := range rs {
		samples[i] = r.sample
		ps, ok := setups[r.position]
		if !ok {
			if pc, found := c.Positions[r.position]; found {
				var err error
				if ps, err = setupPosition(pc, c.Model, ratings, *j.cfg.Params); err != nil {
					return nil, err
				}
			}
			setups[r.position] = ps
		}
		est[i] = math.NaN()
		if ps.cabinet != nil {
			est[i] = ps.cabinet.EstimateInternalAirC(r.sample)
		}
	}
	ap := health.AggregateParams{Interval: j.cfg.Params.Capacitor.Interval, FanRuns: fan.Runs, FanSwitchOnC: fan.SwitchOnC}
	aggs, err := health.BuildHourAggregates(prev.Unix(), !prev.IsZero(), samples, health.LifeAirInputs{InternalC: est}, ap)
	if err != nil {
		return nil, err
	}
	out := make([]store.HourlyReading, 0, len(aggs))
	k := 0
	for _, g := range aggs {
		h := store.HourlyReading{DriveID: c.Drive.ID, Hour: time.Unix(g.Hour, 0).UTC(), Agg: g, Stats: map[string][]float64{}}
		acc := newHourStats()
		for k < len(rs) && rs[k].sample.At <= g.Hour+3600 {
			if rs[k].sample.At > g.Hour {
				acc.add(rs[k].sample)
				h.PositionID = rs[k].position
				h.Samples++
			}
			k++
		}
		h.Stats = acc.result()
		out = append(out, h)
	}
	return out, nil
}

// hourStats gathers min, mean and max per field over an hour.
type hourStats struct {
	min, max, sum [8]float64
	n             [8]int
	i2            float64
	ni            int
}

var hourStatFields = [8]string{"internal_air_c", "ambient_c", "heatsink_c", "current_a", "peak_current_a", "frequency_hz", "bus_v", "bus_ripple_v"}

func newHourStats() *hourStats { return &hourStats{} }

func (h *hourStats) add(s health.Sample) {
	vals := [8]float64{s.InternalAirC, s.AmbientC, s.HeatsinkC, s.CurrentA, s.PeakCurrentA, s.FrequencyHz, s.BusV, s.BusRippleV}
	for i, v := range vals {
		if math.IsNaN(v) {
			continue
		}
		if h.n[i] == 0 || v < h.min[i] {
			h.min[i] = v
		}
		if h.n[i] == 0 || v > h.max[i] {
			h.max[i] = v
		}
		h.sum[i] += v
		h.n[i]++
	}
	if !math.IsNaN(s.CurrentA) {
		h.i2 += s.CurrentA * s.CurrentA
		h.ni++
	}
}

func (h *hourStats) result() map[string][]float64 {
	out := map[string][]float64{}
	for i, name := range hourStatFields {
		if h.n[i] > 0 {
			out[name] = []float64{h.min[i], h.sum[i] / float64(h.n[i]), h.max[i]}
		}
	}
	if h.ni > 0 {
		out["current_ms_a2"] = []float64{h.i2 / float64(h.ni)}
	}
	return out
}
