package web

import (
	"slices"
	"strings"
	"testing"

	"kelvard/health"
	"kelvard/store"
)

func TestReasonParts(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want []textPart
	}{
		{"Recurring: clean filters", []textPart{{Text: "Recurring: clean filters"}}},
		{"Finding 81, environment.board_corrosion (critical): air. Also: finding 82, enclosure.condensation (advice).",
			[]textPart{{Text: "Finding 81", FindingID: 81}, {Text: ", environment.board_corrosion (critical): air. Also: "},
				{Text: "finding 82", FindingID: 82}, {Text: ", enclosure.condensation (advice)."}}},
		{"", nil},
	} {
		if got := reasonParts(tc.in); !slices.Equal(got, tc.want) {
			t.Errorf("reasonParts(%q) = %+v, want %+v", tc.in, got, tc.want)
		}
	}
}

func TestPriorityWord(t *testing.T) {
	// RFC 5545 section 3.8.1.9: 1 to 4 high, 5 medium, 6 to 9 low, 0
	// undefined.
	for p, want := range map[int]string{0: "not set", 1: "high", 4: "high", 5: "medium", 6: "low", 9: "low", 10: "not set"} {
		if got := priorityWord(p); got != want {
			t.Errorf("priorityWord(%d) = %q, want %q", p, got, want)
		}
	}
}

func TestSafetyChecksRestateTheCaution(t *testing.T) {
	// Each printed check is a step of health.SafetyCaution (DESIGN.md
	// section 7): isolation and lock-out, the maker's discharge time, zero
	// voltage verified with a rated meter, the maker's manual, local codes
	// and licensed practice.
	for i, phrase := range []string{"lock out", "discharge time", "rated meter", "licensed practice"} {
		if !strings.Contains(health.SafetyCaution, phrase) || !strings.Contains(safetyChecks[i], strings.Fields(phrase)[0]) {
			t.Errorf("check %d %q does not carry %q of the caution", i+1, safetyChecks[i], phrase)
		}
	}
	if len(safetyChecks) != 4 {
		t.Errorf("%d checks", len(safetyChecks))
	}
}

func TestLineActions(t *testing.T) {
	pos := int64(3)
	keys := func(cs []choiceCount) []string {
		var out []string
		for _, c := range cs {
			out = append(out, c.Key)
		}
		return out
	}
	capLine := store.WorkOrderLine{Task: store.TaskReplaceCapacitors, PositionID: &pos}
	got := lineActions(capLine, true, "")
	if got[0].Key != string(store.ActionReplacedCapacitors) || !got[0].Current || !slices.Contains(keys(got), string(store.ActionSwappedDrive)) {
		t.Errorf("capacitor line: %+v", got)
	}
	if slices.Contains(keys(lineActions(capLine, false, "")), string(store.ActionSwappedDrive)) {
		t.Error("a swap is offered without a spare")
	}
	stored := store.WorkOrderLine{Task: store.TaskEnergise}
	got = lineActions(stored, false, store.ActionReformed)
	if got[0].Key != string(store.ActionEnergised) || !slices.Contains(keys(got), string(store.ActionReformed)) {
		t.Errorf("stored drive: %+v", got)
	}
	for _, c := range got {
		if c.Current != (c.Key == string(store.ActionReformed)) {
			t.Errorf("choice %s current %v", c.Key, c.Current)
		}
		if c.Key == string(store.ActionChangedEnclosure) {
			t.Error("an enclosure change is offered on the page (it needs the cabinet's details)")
		}
	}
}

func TestOrderError(t *testing.T) {
	p := &workOrderPage{Lines: []lineView{
		{WorkOrderLine: store.WorkOrderLine{TaskTitle: "Replace the cooling fan", DriveSerial: "KV1-001"}, No: 0},
		{WorkOrderLine: store.WorkOrderLine{TaskTitle: "Replace the cooling fan", DriveSerial: "KV1-002"}, No: 1},
	}}
	ve := &store.ValidationError{Fields: []store.FieldError{
		{Field: "lines[0].found_esr_milliohm", Reason: "must lie between 0 and 100000"},
		{Field: "scheduled_for", Reason: "is required to schedule an order"},
	}}
	want := "This was not saved. Please correct: line 1 (replace the cooling fan, drive KV1-002): found esr milliohm must lie between 0 and 100000; " +
		"scheduled for is required to schedule an order."
	if got := orderError(ve, p); got != want {
		t.Errorf("orderError =\n%q, want\n%q", got, want)
	}
}

func TestMoneyAndMonths(t *testing.T) {
	for _, tc := range []struct {
		v    float64
		want string
	}{{485, "485"}, {1940.4, "1\u202f940"}, {1234567.5, "1\u202f234\u202f568"}, {0, "0"}} {
		if got := money(tc.v); got != tc.want {
			t.Errorf("money(%v) = %q, want %q", tc.v, got, tc.want)
		}
	}
	if got := monthLabel("2027-03"); got != "Mar 2027" {
		t.Errorf("monthLabel = %q", got)
	}
	if got := monthLabel("horizon"); got != "horizon" {
		t.Errorf("monthLabel of a non-month = %q", got)
	}
}
