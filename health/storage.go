package health

import (
	"fmt"
	"math"
)

// This file holds the drives kept in stores: the thermal ageing of their
// capacitors at storage temperature, and the advice on energising and
// reforming a drive that has stood unpowered.

// StoredCapacitorDamage returns the Miner damage a capacitor bank takes over
// hours in storage at a constant storage temperature, with no ripple
// current:
//
//	D = hours / L(T_storage)
//
// with L from CapacitorSpec.LifeH (capacitor makers' application notes,
// 10-degree rule or Arrhenius) at a core temperature equal to the storage
// air. Valid where LifeH is; cool stores lie below the 40 °C where makers
// stop warranting the extrapolation, so set MaxLifeH on the spec to keep the
// figure honest.
func StoredCapacitorDamage(spec CapacitorSpec, storageC, hours float64) (float64, error) {
	if err := spec.Validate(); err != nil {
		return 0, fmt.Errorf("stored capacitor damage: %w", err)
	}
	if !(hours >= 0) || !lifeFinite(storageC) {
		return 0, fmt.Errorf("stored capacitor damage: hours %v must not be negative and the storage temperature %v must be finite", hours, storageC)
	}
	return hours / spec.LifeH(storageC), nil
}

// AddStoredCapacitorPeriod adds a period in stores, (from, to] in Unix
// seconds at a constant storage temperature without ripple, to a
// capacitor's ledger, spread over the days it covers, and moves the ledger's
// last reading time to to (StoredCapacitorDamage per second; Palmgren–Miner).
// from must not be before the ledger's last reading; time between the last
// reading and from is not filled, because the caller knows where the unit
// was. Valid as StoredCapacitorDamage.
func AddStoredCapacitorPeriod(spec CapacitorSpec, st CapacitorState, from, to int64, storageC float64) (CapacitorState, error) {
	if err := spec.Validate(); err != nil {
		return st, fmt.Errorf("stored capacitor period: %w", err)
	}
	switch {
	case to <= from:
		return st, fmt.Errorf("stored capacitor period: end %d must be after start %d", to, from)
	case st.HasLast && from < st.LastAt:
		return st, fmt.Errorf("stored capacitor period: start %d is before the last reading %d", from, st.LastAt)
	case !lifeFinite(storageC):
		return st, fmt.Errorf("stored capacitor period: storage temperature %v must be finite", storageC)
	}
	law := newCapLaw(spec)
	led := st.LifeLedger
	c := openCursor(&led)
	c.add(from, to, law.rateS(storageC), storageC, 1)
	c.close(&led)
	if !led.HasLast {
		led.FirstAt = from
	}
	led.HasLast, led.LastAt = true, to
	return CapacitorState{led}, nil
}

// StorageParams are the thresholds for drives standing unpowered (common
// practice for aluminium electrolytic DC-bus capacitors, whose oxide layer
// degrades while unbiased). Every field has a default.
type StorageParams struct {
	// EnergiseEveryDays: energise a stored drive at least this often,
	// default 365.
	EnergiseEveryDays float64 `json:"energise_every_days"`
	// NoticeDays: advise this many days before energising falls due,
	// default 30.
	NoticeDays float64 `json:"notice_days"`
	// ReformAfterDays: after more than this many days unpowered, reform
	// the capacitors in steps instead of simply energising, default 730.
	ReformAfterDays float64 `json:"reform_after_days"`
	// NoLoadMinutes is the range of the no-load run after one to two years
	// unpowered, default 30 to 60 minutes.
	NoLoadMinutesMin float64 `json:"no_load_minutes_min"`
	NoLoadMinutesMax float64 `json:"no_load_minutes_max"`
	// ReformSteps are the fractions of rated DC-bus voltage of the stepped
	// reform, default 0.25, 0.5, 0.75, 1.
	ReformSteps []float64 `json:"reform_steps"`
}

// DefaultStorageParams returns the common-practice defaults: energise at
// least yearly (advice 30 days before), run at no load for 30 to 60 minutes
// after one to two years unpowered, reform in steps of about 25/50/75/100 %
// of bus voltage after more than two years.
func DefaultStorageParams() StorageParams {
	return StorageParams{
		EnergiseEveryDays: 365,
		NoticeDays:        30,
		ReformAfterDays:   730,
		NoLoadMinutesMin:  30,
		NoLoadMinutesMax:  60,
		ReformSteps:       []float64{0.25, 0.5, 0.75, 1},
	}
}

// Validate reports the first unusable field.
func (p StorageParams) Validate() error {
	switch {
	case !(p.EnergiseEveryDays > 0):
		return fmt.Errorf("storage params: energising interval %v days must be positive", p.EnergiseEveryDays)
	case !(p.NoticeDays >= 0 && p.NoticeDays < p.EnergiseEveryDays):
		return fmt.Errorf("storage params: notice %v days must lie in [0, energising interval)", p.NoticeDays)
	case !(p.ReformAfterDays >= p.EnergiseEveryDays):
		return fmt.Errorf("storage params: reform threshold %v days must not be below the energising interval", p.ReformAfterDays)
	case !(p.NoLoadMinutesMin > 0 && p.NoLoadMinutesMax >= p.NoLoadMinutesMin):
		return fmt.Errorf("storage params: no-load run %v to %v minutes must be positive and ordered", p.NoLoadMinutesMin, p.NoLoadMinutesMax)
	case len(p.ReformSteps) == 0:
		return fmt.Errorf("storage params: reform steps must not be empty")
	}
	prev := 0.0
	for _, f := range p.ReformSteps {
		if !(f > prev && f <= 1) {
			return fmt.Errorf("storage params: reform steps %v must rise strictly within (0, 1]", p.ReformSteps)
		}
		prev = f
	}
	return nil
}

// StorageAction is what a stored drive needs before it goes into service
// or to stay fit on the shelf.
type StorageAction string

// Storage actions, mildest first.
const (
	StorageNone          StorageAction = "none"
	StorageEnergiseSoon  StorageAction = "energise_soon"
	StorageNoLoadRun     StorageAction = "energise_no_load"
	StorageSteppedReform StorageAction = "reform_stepped"
)

// StorageAdvice is the advice for one stored drive.
type StorageAdvice struct {
	DaysUnpowered float64       `json:"days_unpowered"`
	Action        StorageAction `json:"action"`
	// DueAt is when the drive should next be energised (Unix seconds).
	DueAt int64 `json:"due_at"`
	// ThresholdDays is the threshold that decided the action.
	ThresholdDays float64 `json:"threshold_days"`
}

// AdviseStoredDrive judges a drive that has stood unpowered since
// lastEnergisedAt, at the assessment time at (both Unix seconds, supplied by
// the caller). With t the days unpowered (common practice for aluminium
// electrolytic DC-bus capacitors):
//
//	t <= EnergiseEveryDays - NoticeDays     nothing to do
//	t <= EnergiseEveryDays                  energise soon
//	t <= ReformAfterDays                    energise at no load for 30-60 min
//	t >  ReformAfterDays                    reform in steps of bus voltage
//
// Valid for drives with aluminium electrolytic bus capacitors; film
// capacitor drives need none of this (from memory).
func AdviseStoredDrive(lastEnergisedAt, at int64, p StorageParams) (StorageAdvice, error) {
	if err := p.Validate(); err != nil {
		return StorageAdvice{}, fmt.Errorf("advise stored drive: %w", err)
	}
	if at < lastEnergisedAt {
		return StorageAdvice{}, fmt.Errorf("advise stored drive: assessment time %d is before the last energising %d", at, lastEnergisedAt)
	}
	a := StorageAdvice{
		DaysUnpowered: float64(at-lastEnergisedAt) / lifeSecondsPerDay,
		DueAt:         lastEnergisedAt + int64(math.Round(p.EnergiseEveryDays*lifeSecondsPerDay)),
		Action:        StorageNone,
		ThresholdDays: p.EnergiseEveryDays - p.NoticeDays,
	}
	switch d := a.DaysUnpowered; {
	case d > p.ReformAfterDays:
		a.Action, a.ThresholdDays = StorageSteppedReform, p.ReformAfterDays
	case d >= p.EnergiseEveryDays:
		a.Action, a.ThresholdDays = StorageNoLoadRun, p.EnergiseEveryDays
	case d >= p.EnergiseEveryDays-p.NoticeDays:
		a.Action = StorageEnergiseSoon
	}
	return a, nil
}

// storageRules lists every rule the stored-drive model can raise.
var storageRules = []RuleInfo{
	{ID: "storage.energise_due", Kind: KindStorage, Title: "Stored drive due to be energised", Remedy: "Energise the drive, at no load for 30 to 60 minutes once it has stood a year or more, and record the date."},
	{ID: "storage.reform_required", Kind: KindStorage, Title: "Stored drive needs its capacitors reformed", Remedy: "Reform the DC-bus capacitors in steps of about 25, 50, 75 and 100 % of bus voltage before the drive goes into service."},
}

// StorageFindings turns stored-drive advice into findings:
// storage.energise_due (advice when energising falls due within the notice
// period, minor once it is overdue) and storage.reform_required (major)
// after more than ReformAfterDays unpowered (common practice).
func StorageFindings(a StorageAdvice, p StorageParams) []Finding {
	ev := []Evidence{
		{Name: "days_unpowered", Value: math.Round(a.DaysUnpowered*10) / 10, Unit: "d", Limit: a.ThresholdDays, Source: "common practice"},
		{Name: "energise_due", Value: lifeDate(a.DueAt)},
	}
	switch a.Action {
	case StorageEnergiseSoon:
		return []Finding{{PhysicalWork: true, Rule: "storage.energise_due", Kind: KindStorage, Severity: SeverityAdvice,
			Message:  fmt.Sprintf("The drive has stood unpowered for %.0f days; energise it by %s to keep its capacitors formed.", a.DaysUnpowered, lifeDate(a.DueAt)),
			Evidence: ev, Remedy: "Energise the drive before the due date and record it."}}
	case StorageNoLoadRun:
		return []Finding{{PhysicalWork: true, Rule: "storage.energise_due", Kind: KindStorage, Severity: SeverityMinor,
			Message: fmt.Sprintf("The drive has stood unpowered for %.0f days, more than the %.0f-day interval; energise it at no load for %.0f to %.0f minutes before use.",
				a.DaysUnpowered, p.EnergiseEveryDays, p.NoLoadMinutesMin, p.NoLoadMinutesMax),
			Evidence: ev, Remedy: fmt.Sprintf("Energise the drive at no load for %.0f to %.0f minutes and record the date.", p.NoLoadMinutesMin, p.NoLoadMinutesMax)}}
	case StorageSteppedReform:
		steps := ""
		for i, f := range p.ReformSteps {
			if i > 0 {
				steps += ", "
			}
			steps += fmt.Sprintf("%.0f %%", f*100)
		}
		ev = append(ev, Evidence{Name: "reform_steps_fraction_of_bus_voltage", Value: p.ReformSteps, Source: "common practice"})
		return []Finding{{PhysicalWork: true, Rule: "storage.reform_required", Kind: KindStorage, Severity: SeverityMajor,
			Message: fmt.Sprintf("The drive has stood unpowered for %.0f days, more than %.0f; its DC-bus capacitors must be reformed before it goes into service.",
				a.DaysUnpowered, p.ReformAfterDays),
			Evidence: ev, Remedy: fmt.Sprintf("Reform the DC-bus capacitors in steps of %s of bus voltage, following the drive maker's procedure, before use.", steps)}}
	}
	return nil
}
