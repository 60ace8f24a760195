// Package plan turns the assessments and the register's history into
// plans: the replacement forecast with its budget, the fleet's failure
// statistics with the spares to hold, and work orders. It owns the
// `kelvard plan` command and the CSV and iCalendar formats of the exports;
// the nightly planning job that runs it is in jobs/plan.
//
// Forecast (BuildForecast): each drive's capacitor and fan end of life from
// its latest assessment (health.LifeReport: (1 - D)/r at the
// trailing-12-month damage rate, with the band from the harshest and
// mildest month), over a horizon of calendar months (default 24), later
// cycles one whole life apart at the same rates, priced from the drive
// model's costs into a budget by month and site. Replace or refurbish:
// capacitors are replaced in the drive while a kit costs less than
// Config.RefurbishShare (default 0.5, the "repair while under half of new"
// rule of thumb, common practice) of a new drive; otherwise the drive is
// replaced.
//
// Reliability (BuildReliability): two-parameter Weibull fits by maximum
// likelihood with suspensions (health.FitWeibull) per group (the fleet,
// each drive model, each environment class = location/ISA-71.04 corrosion
// level) and failure mode, with B10 and Fisher-matrix bounds, probability
// plot points (health.MedianRanks), expected failures of the running units
// in 12 months, spare drives per model over its lead time at 90 and 95 %
// service (health.SparesToHold, Poisson), and a backtest of the capacitor
// life model. Ages are hours: component age for capacitor and fan modes,
// unit age in service for the others (lifedata.go says exactly).
//
// Work orders (BuildProposals, Refresh): proposals from open findings whose
// remedy is physical work, from forecast replacements inside the model's
// lead time plus a margin, and from recurring tasks (filter and heatsink
// cleaning at an interval set by the area's dust, energising spares
// yearly), keyed by cause and synchronised by store.SyncProposals, which
// groups them by site, area and month, never proposes a cause twice and
// withdraws a proposal whose cause cleared. The lifecycle and the
// completion's effects on the register live in the store, so every front
// door shares them. Every order carries health.SafetyCaution.
package plan
