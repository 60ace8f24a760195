package health

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat"
)

// This file watches the heatsink temperature rise over ambient at comparable
// load. A rise that grows week by week at the same load points to a clogged
// filter, a dirty heatsink or a failing fan (common practice).

// HeatsinkParams are the settings of the heatsink-rise trend. Every field has
// a default in DefaultHeatsinkParams; the thresholds are common practice and
// meant to be tuned per drive model or site.
type HeatsinkParams struct {
	// WindowDays is the trailing window examined, default 84 (12 weeks).
	WindowDays int `json:"window_days"`
	// LoadBinFraction is the width of the load bins as a fraction of rated
	// current, default 0.1.
	LoadBinFraction float64 `json:"load_bin_fraction"`
	// MinLoadFraction: readings below this load are ignored, default 0.2,
	// because the rise at light load is too small to judge.
	MinLoadFraction float64 `json:"min_load_fraction"`
	// MinSamplesPerCell is the least number of readings for a weekly mean
	// in one load bin, default 6.
	MinSamplesPerCell int `json:"min_samples_per_cell"`
	// MinWeeks is the least number of weekly means for a load bin to count,
	// default 4.
	MinWeeks int `json:"min_weeks"`
	// MinSlopeKPerWeek is the least combined slope for a finding, default
	// 0.1 K per week.
	MinSlopeKPerWeek float64 `json:"min_slope_k_per_week"`
	// MinorRiseK and MajorRiseK are the increases of the rise across the
	// weeks examined that make the finding minor (default 3 K) or major
	// (default 8 K).
	MinorRiseK float64 `json:"minor_rise_k"`
	MajorRiseK float64 `json:"major_rise_k"`
}

// DefaultHeatsinkParams returns the defaults documented on each field
// (common practice).
func DefaultHeatsinkParams() HeatsinkParams {
	return HeatsinkParams{
		WindowDays:        84,
		LoadBinFraction:   0.1,
		MinLoadFraction:   0.2,
		MinSamplesPerCell: 6,
		MinWeeks:          4,
		MinSlopeKPerWeek:  0.1,
		MinorRiseK:        3,
		MajorRiseK:        8,
	}
}

// Validate reports the first unusable field.
func (p HeatsinkParams) Validate() error {
	switch {
	case p.WindowDays < 14:
		return fmt.Errorf("heatsink params: window %d days must be at least 14", p.WindowDays)
	case !(p.LoadBinFraction > 0 && p.LoadBinFraction <= 1):
		return fmt.Errorf("heatsink params: load bin %v must lie in (0, 1]", p.LoadBinFraction)
	case !(p.MinLoadFraction >= 0 && p.MinLoadFraction < 2):
		return fmt.Errorf("heatsink params: minimum load %v must lie in [0, 2)", p.MinLoadFraction)
	case p.MinSamplesPerCell < 1:
		return fmt.Errorf("heatsink params: minimum samples per cell %d must be at least 1", p.MinSamplesPerCell)
	case p.MinWeeks < 3:
		return fmt.Errorf("heatsink params: minimum weeks %d must be at least 3", p.MinWeeks)
	case !(p.MinSlopeKPerWeek >= 0):
		return fmt.Errorf("heatsink params: minimum slope %v K/week must not be negative", p.MinSlopeKPerWeek)
	case !(p.MinorRiseK > 0 && p.MajorRiseK >= p.MinorRiseK):
		return fmt.Errorf("heatsink params: minor %v K and major %v K increases must satisfy 0 < minor <= major", p.MinorRiseK, p.MajorRiseK)
	}
	return nil
}

// HeatsinkBinTrend is the trend within one load bin.
type HeatsinkBinTrend struct {
	LoadFromFraction float64 `json:"load_from_fraction"`
	LoadToFraction   float64 `json:"load_to_fraction"`
	Weeks            int     `json:"weeks"`
	MeanRiseK        float64 `json:"mean_rise_k"`
	// LoadSlopeK is the rise per unit load used to bring each weekly mean
	// to the bin's mean load, from the neighbouring bins.
	LoadSlopeK    float64 `json:"load_slope_k"`
	SlopeKPerWeek float64 `json:"slope_k_per_week"`
}

// HeatsinkTrendReport is the heatsink-rise trend of one drive.
type HeatsinkTrendReport struct {
	// Samples counts the readings used.
	Samples int                `json:"samples"`
	Bins    []HeatsinkBinTrend `json:"bins"`
	// Usable tells whether at least one load bin had MinWeeks weekly means.
	Usable bool `json:"usable"`
	// SlopeKPerWeek is the combined slope; WeeksSpanned the weeks between
	// the first and last weekly mean used; IncreaseK their product.
	SlopeKPerWeek float64 `json:"slope_k_per_week"`
	WeeksSpanned  float64 `json:"weeks_spanned"`
	IncreaseK     float64 `json:"increase_k"`
}

// HeatsinkTrend measures how the heatsink rise over ambient, at comparable
// load, changes week by week over the trailing WindowDays before at (Unix
// seconds, supplied by the caller).
//
// Readings count while the drive runs with heatsink, ambient and current
// logged and load I/I_rated at least MinLoadFraction. They are grouped by
// load bin (LoadBinFraction wide) and week; each (bin, week) cell with
// MinSamplesPerCell readings gives a mean rise and mean load. Within a bin,
// each weekly mean is first moved to the bin's mean load along the local
// rise-per-load slope taken from the neighbouring bins' means (so a drift of
// load inside a bin is not read as fouling), then the least-squares slope of
// rise against week is fitted (gonum stat.LinearRegression). The bins'
// slopes are combined weighted by sum((week - mean week)^2), which is the
// pooled within-bin least-squares slope. Common practice; valid when the
// cooling air path is the only thing changing over the window, and it
// cannot tell a fouling trend from a load trend that has the same shape in
// every bin at once.
func HeatsinkTrend(samples []Sample, ratedCurrentA float64, at int64, p HeatsinkParams) (HeatsinkTrendReport, error) {
	if err := p.Validate(); err != nil {
		return HeatsinkTrendReport{}, fmt.Errorf("heatsink trend: %w", err)
	}
	if !(ratedCurrentA > 0) {
		return HeatsinkTrendReport{}, fmt.Errorf("heatsink trend: rated current %v A must be positive", ratedCurrentA)
	}
	const week = 7 * lifeSecondsPerDay
	start := at - int64(p.WindowDays)*lifeSecondsPerDay
	type key struct{ bin, week int }
	type cell struct {
		n          int
		rise, load float64
	}
	cells := map[key]*cell{}
	var rep HeatsinkTrendReport
	for i := range samples {
		s := &samples[i]
		if s.At <= start || s.At > at || !s.Running() {
			continue
		}
		if !lifeFinite(s.HeatsinkC) || !lifeFinite(s.AmbientC) || !lifeFinite(s.CurrentA) {
			continue
		}
		load := math.Abs(s.CurrentA) / ratedCurrentA
		if load < p.MinLoadFraction || load > 3 {
			continue
		}
		k := key{int(math.Floor(load / p.LoadBinFraction)), int((s.At - start - 1) / week)}
		c := cells[k]
		if c == nil {
			c = &cell{}
			cells[k] = c
		}
		c.n++
		c.rise += s.HeatsinkC - s.AmbientC
		c.load += load
		rep.Samples++
	}
	// Weekly means per bin, bins in order.
	type weekly struct{ week, rise, load []float64 }
	keys := make([]key, 0, len(cells))
	for k := range cells {
		keys = append(keys, k)
	}
	slices.SortFunc(keys, func(a, b key) int {
		if a.bin != b.bin {
			return a.bin - b.bin
		}
		return a.week - b.week
	})
	byBin := map[int]*weekly{}
	for _, k := range keys {
		c := cells[k]
		if c.n < p.MinSamplesPerCell {
			continue
		}
		w := byBin[k.bin]
		if w == nil {
			w = &weekly{}
			byBin[k.bin] = w
		}
		w.week = append(w.week, float64(k.week))
		w.rise = append(w.rise, c.rise/float64(c.n))
		w.load = append(w.load, c.load/float64(c.n))
	}
	var bins []int
	for b, w := range byBin {
		if len(w.week) >= p.MinWeeks {
			bins = append(bins, b)
		}
	}
	slices.Sort(bins)
	if len(bins) == 0 {
		return rep, nil
	}
	rep.Usable = true
	meanLoad := make([]float64, len(bins))
	meanRise := make([]float64, len(bins))
	for i, b := range bins {
		meanLoad[i] = stat.Mean(byBin[b].load, nil)
		meanRise[i] = stat.Mean(byBin[b].rise, nil)
	}
	var sxx, sxy float64
	minWeek, maxWeek := math.Inf(1), math.Inf(-1)
	for i, b := range bins {
		w := byBin[b]
		// Local rise per unit load: secant through the neighbouring bins.
		lo, hi := max(i-1, 0), min(i+1, len(bins)-1)
		slope := 0.0
		if hi > lo && meanLoad[hi] > meanLoad[lo] {
			slope = (meanRise[hi] - meanRise[lo]) / (meanLoad[hi] - meanLoad[lo])
		}
		adj := make([]float64, len(w.rise))
		for j := range w.rise {
			adj[j] = w.rise[j] - slope*(w.load[j]-meanLoad[i])
		}
		_, beta := stat.LinearRegression(w.week, adj, nil, false)
		mw := stat.Mean(w.week, nil)
		var bxx float64
		for _, x := range w.week {
			bxx += (x - mw) * (x - mw)
			minWeek, maxWeek = math.Min(minWeek, x), math.Max(maxWeek, x)
		}
		sxx += bxx
		sxy += beta * bxx
		rep.Bins = append(rep.Bins, HeatsinkBinTrend{
			LoadFromFraction: math.Round(float64(b)*p.LoadBinFraction*1e9) / 1e9,
			LoadToFraction:   math.Round(float64(b+1)*p.LoadBinFraction*1e9) / 1e9,
			Weeks:            len(w.week),
			MeanRiseK:        meanRise[i],
			LoadSlopeK:       slope,
			SlopeKPerWeek:    beta,
		})
	}
	if sxx > 0 {
		rep.SlopeKPerWeek = sxy / sxx
	}
	rep.WeeksSpanned = maxWeek - minWeek
	rep.IncreaseK = rep.SlopeKPerWeek * rep.WeeksSpanned
	return rep, nil
}

// heatsinkRules lists every rule the heatsink trend can raise.
var heatsinkRules = []RuleInfo{
	{ID: "fan.heatsink_rise", Kind: KindFan, Title: "Heatsink running hotter at the same load", Remedy: remedyHeatsinkRise},
}

const remedyHeatsinkRise = "Inspect the cooling path: clean or replace the air filters, clean the heatsink fins and check that the fan turns freely at full speed."

// HeatsinkFindings raises fan.heatsink_rise when the combined slope is at
// least MinSlopeKPerWeek and the increase across the weeks examined reaches
// MinorRiseK (minor) or MajorRiseK (major); common practice.
func HeatsinkFindings(r HeatsinkTrendReport, p HeatsinkParams) []Finding {
	if !r.Usable || r.SlopeKPerWeek < p.MinSlopeKPerWeek || r.IncreaseK < p.MinorRiseK {
		return nil
	}
	sev := SeverityMinor
	if r.IncreaseK >= p.MajorRiseK {
		sev = SeverityMajor
	}
	return []Finding{{
		PhysicalWork: true, Rule: "fan.heatsink_rise", Kind: KindFan, Severity: sev,
		Message: fmt.Sprintf("At the same load the heatsink runs %.1f K hotter over ambient than %.0f weeks ago (%.2f K per week): a clogged filter, a dirty heatsink or a failing fan.",
			r.IncreaseK, r.WeeksSpanned, r.SlopeKPerWeek),
		Evidence: []Evidence{
			{Name: "rise_increase_k", Value: math.Round(r.IncreaseK*100) / 100, Unit: "K", Limit: p.MinorRiseK, Source: "common practice"},
			{Name: "major_rise_increase_k", Value: p.MajorRiseK, Unit: "K", Source: "common practice"},
			{Name: "slope_k_per_week", Value: math.Round(r.SlopeKPerWeek*1000) / 1000, Unit: "K/week", Limit: p.MinSlopeKPerWeek, Source: "common practice"},
			{Name: "weeks_spanned", Value: r.WeeksSpanned},
			{Name: "load_bins_used", Value: len(r.Bins)},
		},
		Remedy: remedyHeatsinkRise,
	}}
}
