package store

import "slices"

// WorkTask is what a work order line asks the trade to do, as a stable
// snake_case id in plain trade words, with its title (Title) and the kind
// of action it is (DefaultAction); the parts and default labour for a task
// live with the planning code (store/plan).
type WorkTask string

// Work tasks.
const (
	TaskReplaceCapacitors   WorkTask = "replace_capacitors"
	TaskReplaceFan          WorkTask = "replace_fan"
	TaskReplaceDrive        WorkTask = "replace_drive"
	TaskEnergise            WorkTask = "energise_stored_drive"
	TaskReform              WorkTask = "reform_capacitors"
	TaskUpgradeEnclosure    WorkTask = "upgrade_enclosure"
	TaskCoolingOrShade      WorkTask = "add_cooling_or_shade"
	TaskCorrectSupply       WorkTask = "correct_supply"
	TaskLowerCarrierResize  WorkTask = "lower_carrier_or_resize"
	TaskBrakingOrLongerRamp WorkTask = "add_braking_or_lengthen_ramp"
	TaskCleanFilters        WorkTask = "clean_filters_and_heatsink"
	TaskInspect             WorkTask = "inspect"
)

var workTasks = []WorkTask{TaskReplaceCapacitors, TaskReplaceFan, TaskReplaceDrive, TaskEnergise, TaskReform,
	TaskUpgradeEnclosure, TaskCoolingOrShade, TaskCorrectSupply, TaskLowerCarrierResize, TaskBrakingOrLongerRamp,
	TaskCleanFilters, TaskInspect}

// WorkTasks returns every task id.
func WorkTasks() []WorkTask { return slices.Clone(workTasks) }

// Valid reports whether t is a known task.
func (t WorkTask) Valid() bool { return slices.Contains(workTasks, t) }

// Title returns the task in plain words, for exports and tables.
func (t WorkTask) Title() string {
	switch t {
	case TaskReplaceCapacitors:
		return "Replace the DC-bus capacitors"
	case TaskReplaceFan:
		return "Replace the cooling fan"
	case TaskReplaceDrive:
		return "Replace the drive (swap in a spare or new unit)"
	case TaskEnergise:
		return "Energise the stored drive"
	case TaskReform:
		return "Reform the stored drive's DC-bus capacitors"
	case TaskUpgradeEnclosure:
		return "Relocate the drive or upgrade its enclosure"
	case TaskCoolingOrShade:
		return "Add cabinet cooling or shade"
	case TaskCorrectSupply:
		return "Correct the supply"
	case TaskLowerCarrierResize:
		return "Lower the carrier frequency or resize the drive"
	case TaskBrakingOrLongerRamp:
		return "Add a braking resistor or lengthen the deceleration ramp"
	case TaskCleanFilters:
		return "Clean the filters and heatsink"
	case TaskInspect:
		return "Inspect"
	}
	return string(t)
}

// WorkAction is what was done on a line when its order was completed.
type WorkAction string

// Work actions. ReplacedCapacitors and ReplacedFan restart that
// component's life; SwappedDrive moves drives between the position and
// stores; Energised and Reformed record the date on a stored drive;
// ChangedEnclosure updates the position's mounting and cabinet.
const (
	ActionReplacedCapacitors WorkAction = "replaced_capacitors"
	ActionReplacedFan        WorkAction = "replaced_fan"
	ActionSwappedDrive       WorkAction = "swapped_drive"
	ActionEnergised          WorkAction = "energised"
	ActionReformed           WorkAction = "reformed"
	ActionChangedEnclosure   WorkAction = "changed_enclosure"
	ActionWorkDone           WorkAction = "work_done"
	ActionNothingNeeded      WorkAction = "nothing_needed"
	ActionNotDone            WorkAction = "not_done"
)

var workActions = []WorkAction{ActionReplacedCapacitors, ActionReplacedFan, ActionSwappedDrive, ActionEnergised, ActionReformed,
	ActionChangedEnclosure, ActionWorkDone, ActionNothingNeeded, ActionNotDone}

// WorkActions returns every action.
func WorkActions() []WorkAction { return slices.Clone(workActions) }

// DefaultAction is what completing a line of the task does when the
// completion names no action: the task as planned. A drive replacement
// needs the spare's id, and an enclosure change the new enclosure, so their
// default records the work without changing the register.
func (t WorkTask) DefaultAction() WorkAction {
	switch t {
	case TaskReplaceCapacitors:
		return ActionReplacedCapacitors
	case TaskReplaceFan:
		return ActionReplacedFan
	case TaskEnergise:
		return ActionEnergised
	case TaskReform:
		return ActionReformed
	}
	return ActionWorkDone
}
