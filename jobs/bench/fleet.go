package bench

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"sync"
	"time"

	"kelvard/store"
)

// fleet is the register the benchmark posts readings to: one site, a few
// areas, one drive model and a drive installed at every position.
type fleet struct {
	tags      []string // position tags, by position number
	positions []int64  // position ids, by position number
	drives    []int64  // drive ids, by position number
}

// registerFleet builds a fleet of n positions through the store, with a
// drive installed at each from installedAt.
func registerFleet(ctx context.Context, st *store.Store, n int, installedAt time.Time) (fleet, error) {
	site, err := store.Create(ctx, st, func(v *store.Site) error {
		v.Name, v.ElevationM, v.AmbientMinC, v.AmbientMaxC = "Bench works", 40, -5, 38
		return nil
	})
	if err != nil {
		return fleet{}, fmt.Errorf("register site: %w", err)
	}
	var areas []int64
	for i := range 5 {
		a, err := store.Create(ctx, st, func(v *store.Area) error {
			v.SiteID, v.Name = site.ID, fmt.Sprintf("Pump hall %d", i+1)
			v.Environment.AmbientMinC, v.Environment.AmbientMaxC = 5, 35
			return nil
		})
		if err != nil {
			return fleet{}, fmt.Errorf("register area: %w", err)
		}
		areas = append(areas, a.ID)
	}
	model, err := store.Create(ctx, st, func(v *store.DriveModel) error {
		v.Name, v.VoltageClassV = "Bench 45 kW", 480
		v.NormalDutyCurrentA, v.NormalDutyPowerKW, v.HeavyDutyCurrentA, v.HeavyDutyPowerKW = 77, 45, 65, 37
		v.Enclosure = store.EnclosureSpec{NEMAType: "1", IPCode: "IP21"}
		return nil
	})
	if err != nil {
		return fleet{}, fmt.Errorf("register drive model: %w", err)
	}
	f := fleet{tags: make([]string, n), positions: make([]int64, n), drives: make([]int64, n)}
	// Positions one by one keep their ids in position order, so every
	// schema of a run numbers them alike; the drives and moves go four at
	// a time.
	for i := range n {
		f.tags[i] = fmt.Sprintf("BP-%04d", i+1)
		p, err := store.Create(ctx, st, func(v *store.Position) error {
			v.AreaID, v.Tag, v.SupplyVoltageV = areas[i%len(areas)], f.tags[i], 480
			return nil
		})
		if err != nil {
			return fleet{}, fmt.Errorf("register position %s: %w", f.tags[i], err)
		}
		f.positions[i] = p.ID
	}
	work := make(chan int)
	errs := make(chan error, 4)
	var wg sync.WaitGroup
	for range 4 {
		wg.Go(func() {
			for i := range work {
				d, err := store.Create(ctx, st, func(v *store.Drive) error {
					v.Serial, v.ModelID, v.SiteID = fmt.Sprintf("BENCH-%04d", i+1), model.ID, site.ID
					v.ManufacturedAt = installedAt.AddDate(-1, 0, 0)
					return nil
				})
				if err == nil {
					f.drives[i] = d.ID
					_, err = st.MoveDrive(ctx, d.ID, store.Move{PositionID: &f.positions[i], At: installedAt})
				}
				if err != nil {
					errs <- fmt.Errorf("register drive at %s: %w", f.tags[i], err)
					return
				}
			}
		})
	}
	var firstErr error
feed:
	for i := range n {
		select {
		case work <- i:
		case firstErr = <-errs:
			break feed
		}
	}
	close(work)
	wg.Wait()
	close(errs)
	if firstErr == nil {
		firstErr = <-errs
	}
	if firstErr != nil {
		return fleet{}, firstErr
	}
	return f, nil
}

// timeline places the benchmark's readings: hourly, for every position,
// ending an hour before now.
type timeline struct {
	positions int
	start     time.Time
	hours     int
}

func newTimeline(now time.Time, readings, positions int) timeline {
	hours := (readings + positions - 1) / positions
	end := now.UTC().Truncate(time.Hour).Add(-time.Hour)
	return timeline{positions: positions, start: end.Add(-time.Duration(hours) * time.Hour), hours: hours}
}

// last is the time of the timeline's last hour.
func (tl timeline) last() time.Time { return tl.start.Add(time.Duration(tl.hours-1) * time.Hour) }

// reading makes reading number r: hour r/positions at position
// r%positions. Its values depend only on r, so every phase of a run sends
// the same data. Capacitance and ESR come once a day, as many drives report
// them.
func (tl timeline) reading(r int, tags []string) store.Reading {
	p, h := r%tl.positions, r/tl.positions
	rng := rand.New(rand.NewPCG(uint64(r), 0x6b656c76))
	at := tl.start.Add(time.Duration(h) * time.Hour)
	day := 2 * math.Pi * float64(at.Hour()) / 24
	ambient := round2(24 + 6*math.Sin(day) + rng.Float64())
	running := rng.Float64() < 0.85
	current, freq := 0.0, 0.0
	if running {
		current, freq = round2(30+25*rng.Float64()), round2(35+15*rng.Float64())
	}
	rd := store.Reading{
		Position:      tags[p],
		At:            at,
		AmbientC:      ptr(ambient),
		InternalAirC:  ptr(round2(ambient + 6 + current/10)),
		HeatsinkC:     ptr(round2(ambient + 12 + current/4)),
		CurrentA:      ptr(current),
		PeakCurrentA:  ptr(round2(current * (1 + 0.2*rng.Float64()))),
		FrequencyHz:   ptr(freq),
		BusV:          ptr(round2(672 + 10*rng.Float64())),
		BusRippleV:    ptr(round2(4 + 4*rng.Float64())),
		RunHoursH:     ptr(float64(20000 + h)),
		PowerOnHoursH: ptr(float64(31000 + h)),
	}
	if at.Hour() == 0 {
		rd.DriveCapacitorLifeUsedFraction = ptr(round2(0.2 + 0.3*rng.Float64()))
		rd.DriveFanLifeUsedFraction = ptr(round2(0.3 + 0.3*rng.Float64()))
		rd.CapacitanceUF = ptr(round2(4600 + 100*rng.Float64()))
		rd.ESRMilliohm = ptr(round2(28 + 4*rng.Float64()))
	}
	return rd
}

func ptr(v float64) *float64 { return &v }

func round2(v float64) float64 { return math.Round(v*100) / 100 }

// jsonBody encodes readings as a posted JSON array, one object a line;
// a row's site is written only when it names one.
func jsonBody(rows []store.Reading) []byte {
	out := make([]byte, 0, len(rows)*360)
	out = append(out, '[')
	for i := range rows {
		r := &rows[i]
		if i > 0 {
			out = append(out, ",\n"...)
		}
		out = append(out, '{')
		if r.Site != "" {
			out = append(out, `"site":`...)
			out = strconv.AppendQuote(out, r.Site)
			out = append(out, ',')
		}
		out = append(out, `"position":`...)
		out = strconv.AppendQuote(out, r.Position)
		out = append(out, `,"at":"`...)
		out = r.At.UTC().AppendFormat(out, time.RFC3339Nano)
		out = append(out, '"')
		for _, c := range []struct {
			name string
			v    *float64
		}{
			{"internal_air_c", r.InternalAirC}, {"ambient_c", r.AmbientC}, {"heatsink_c", r.HeatsinkC},
			{"current_a", r.CurrentA}, {"peak_current_a", r.PeakCurrentA}, {"frequency_hz", r.FrequencyHz},
			{"bus_v", r.BusV}, {"bus_ripple_v", r.BusRippleV}, {"run_hours_h", r.RunHoursH},
			{"power_on_hours_h", r.PowerOnHoursH}, {"drive_capacitor_life_used_fraction", r.DriveCapacitorLifeUsedFraction},
			{"drive_fan_life_used_fraction", r.DriveFanLifeUsedFraction}, {"capacitance_uf", r.CapacitanceUF},
			{"esr_milliohm", r.ESRMilliohm},
		} {
			out = append(out, `,"`...)
			out = append(out, c.name...)
			out = append(out, `":`...)
			if c.v == nil {
				out = append(out, "null"...)
			} else {
				out = strconv.AppendFloat(out, *c.v, 'g', -1, 64)
			}
		}
		out = append(out, '}')
	}
	return append(out, "]\n"...)
}
