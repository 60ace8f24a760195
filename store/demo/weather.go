package demo

import (
	"math"
	"math/rand/v2"
	"time"
)

// This file makes the weather and the process demand of the reading year:
// hour by hour outdoor air and sun per site, the region's drinking-water
// demand, rain and sewage inflow. Positions read these shared series, so
// pumps at one station see the same demand and drives at one site the same
// weather.

// hoursPerYear is the length of the reading year: 365 days of hourly
// readings.
const hoursPerYear = 8760

// localOffset is the sites' offset from UTC (zoneName, UTC+2).
const localOffset = 2 * time.Hour

// regionClimate holds the shared hourly series of the reading year. Index
// h is the hour ending at ReadingsStart + (h+1) hours.
type regionClimate struct {
	start time.Time
	// outC and sun per site (index as fleetSites); sun is the share of
	// design irradiance on a sunlit surface, 0 at night.
	outC [][]float64
	sun  [][]float64
	// sunLag is sun smoothed over a few hours (walls and roofs store heat).
	sunLag [][]float64
	// hl, doy and day are each hour's local clock hour (at the middle of
	// the hour), local day of the year and local day number.
	hl, doy []float64
	day     []int64
	// demand is drinking-water demand as a share of the peak, rain the
	// rainfall intensity (0 dry, 1 a heavy storm) and inflow the sewage
	// inflow as a share of the dry-weather peak (above 1 in storms).
	demand, rain, inflow []float64
}

// hourAt returns the UTC time at the end of hour h.
func (c *regionClimate) hourAt(h int) time.Time {
	return c.start.Add(time.Duration(h+1) * time.Hour)
}

// localHour returns the local clock hour (0-23, fractional at the middle of
// the hour) of hour h.
func (c *regionClimate) localHour(h int) float64 { return c.hl[h] }

// dayOfYear returns the day of the year (0-365) at the middle of hour h,
// local time.
func (c *regionClimate) dayOfYear(h int) float64 { return c.doy[h] }

// fillClock computes the local clock of every hour once.
func (c *regionClimate) fillClock() {
	c.hl = make([]float64, hoursPerYear)
	c.doy = make([]float64, hoursPerYear)
	c.day = make([]int64, hoursPerYear)
	for h := range hoursPerYear {
		t := c.hourAt(h).Add(-30 * time.Minute)
		lt := t.Add(localOffset)
		c.hl[h] = float64(lt.Hour()) + float64(lt.Minute())/60
		c.doy[h] = float64(lt.YearDay()-1) + float64(lt.Hour())/24
		c.day[h] = localDay(t)
	}
}

// season is +1 at the height of summer (late July) and -1 in late January.
func season(doy float64) float64 { return math.Cos(2 * math.Pi * (doy - 205) / 365.25) }

// sunShare returns the clear-sky share of design irradiance on a sunlit
// surface at local hour hl on day doy: a half sine from sunrise to sunset,
// days of 10 to 14 hours, a higher sun in summer (kelvard's simplification,
// good enough for the shape of a day).
func sunShare(hl, doy float64) float64 {
	sz := math.Cos(2 * math.Pi * (doy - 172) / 365.25)
	dayLen := 12 + 2*sz
	rise := 12.5 - dayLen/2
	if hl <= rise || hl >= rise+dayLen {
		return 0
	}
	peak := 0.62 + 0.38*sz
	return peak * math.Sin(math.Pi*(hl-rise)/dayLen)
}

// makeClimate draws the reading year's shared series.
func makeClimate(rng *rand.Rand, start time.Time, sites []*siteDef) *regionClimate {
	c := &regionClimate{start: start}
	c.fillClock()
	n := hoursPerYear
	// Cloud cover is regional: a slow random walk kept in [0, 1], cloudier
	// in winter.
	cloud := make([]float64, n)
	cl := 0.3
	for h := range n {
		s := season(c.dayOfYear(h))
		target := 0.35 - 0.2*s
		cl += 0.04*(target-cl) + 0.06*rng.NormFloat64()
		cl = math.Max(0, math.Min(1, cl))
		cloud[h] = cl
	}
	for _, sd := range sites {
		out := make([]float64, n)
		sun := make([]float64, n)
		lag := make([]float64, n)
		anom, sl := 0.0, 0.0
		// Day-to-day weather: an AR(1) process with a two-day memory whose
		// stationary spread is anomalyK.
		phi := math.Exp(-1.0 / 48)
		sigma := sd.anomalyK * math.Sqrt(1-phi*phi)
		for h := range n {
			hl, doy := c.localHour(h), c.dayOfYear(h)
			sun[h] = sunShare(hl, doy) * (1 - 0.75*cloud[h])
			sl += (sun[h] - sl) * (1 - math.Exp(-1.0/3))
			lag[h] = sl
			anom = phi*anom + sigma*rng.NormFloat64()
			daily := sd.dailyK * (0.55 + 0.45*(1-cloud[h])) * math.Cos(2*math.Pi*(hl-15)/24)
			out[h] = sd.meanC + sd.seasonalK*season(doy) + daily + anom + 0.15*rng.NormFloat64()
		}
		c.outC = append(c.outC, out)
		c.sun = append(c.sun, sun)
		c.sunLag = append(c.sunLag, lag)
	}

	c.demand = make([]float64, n)
	c.rain = make([]float64, n)
	c.inflow = make([]float64, n)
	dayFactor := 1.0
	storm := 0.0
	wet := 0.0
	for h := range n {
		hl, doy := c.localHour(h), c.dayOfYear(h)
		s := season(doy)
		if int(hl) == 0 {
			dayFactor = 1 + 0.05*rng.NormFloat64()
		}
		// Drinking water: a night trough, a morning and an evening peak,
		// more in summer (common shape of a utility's diurnal demand).
		d := 0.55 + 0.3*gauss(hl, 7.5, 2) + 0.25*gauss(hl, 19, 2.5) - 0.22*gauss(hl, 3, 2.5)
		d *= (1 + 0.12*s) * dayFactor
		c.demand[h] = math.Max(0.15, math.Min(1, d))
		// Storms arrive about forty times a year, more in winter, and
		// decay over a day or so.
		if rng.Float64() < (40.0/8760)*(1-0.7*s) {
			storm += 0.5 + 0.6*rng.Float64()
		}
		storm *= math.Exp(-1.0 / 10)
		c.rain[h] = math.Min(1, storm)
		wet += (storm - wet) * (1 - math.Exp(-1.0/8))
		// Sewage: the diurnal shape of water use shifted by an hour or two
		// of travel, plus storm water through the network.
		dry := 0.5 + 0.35*gauss(hl, 9.5, 2.5) + 0.25*gauss(hl, 20.5, 2.5) - 0.25*gauss(hl, 4.5, 2.5)
		c.inflow[h] = math.Max(0.12, dry*(1+0.05*s)+0.9*wet)
	}
	return c
}

// gauss is a bell of height 1 centred at mu on a 24-hour clock.
func gauss(x, mu, sd float64) float64 {
	d := math.Mod(x-mu+36, 24) - 12
	return math.Exp(-d * d / (2 * sd * sd))
}

// areaAir returns the air of an area at hour h, before the per-position
// offset and sensor noise.
func (c *regionClimate) areaAir(a *areaDef, siteIdx, h int) float64 {
	out := c.outC[siteIdx][h]
	return a.site.meanC + a.offsetK + a.coupling*(out-a.site.meanC) + a.sunK*c.sunLag[siteIdx][h]
}
