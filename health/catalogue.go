package health

import (
	"slices"
	"strings"
)

// Catalogue returns every rule the models can raise, sorted by id. Pages,
// the API and the documentation list rules from here, so a new rule needs
// only its entry in its file's rule list and a line in ruleGroups.
func Catalogue() []RuleInfo {
	var out []RuleInfo
	for _, g := range ruleGroups() {
		out = append(out, g.rules...)
	}
	slices.SortFunc(out, func(a, b RuleInfo) int { return strings.Compare(a.ID, b.ID) })
	return out
}

// Rule returns the catalogue entry of one rule id.
func Rule(id string) (RuleInfo, bool) {
	for _, g := range ruleGroups() {
		if i := slices.IndexFunc(g.rules, func(r RuleInfo) bool { return r.ID == id }); i >= 0 {
			return g.rules[i], true
		}
	}
	return RuleInfo{}, false
}

// ruleGroup is the rules one check raises. A check that runs reports all of
// its rules as evaluated, so a finding of the group that no longer holds can
// clear; a check that did not run leaves its findings as they were.
type ruleGroup struct {
	check string
	rules []RuleInfo
}

// Checks, in the order AssessDrive runs them.
const (
	checkEnclosure   = "enclosure"
	checkDerating    = "derating"
	checkDuty        = "duty"
	checkCabinet     = "cabinet"
	checkDCBus       = "dc_bus"
	checkSilence     = "silence"
	checkDataQuality = "data_quality"
	checkCapacitor   = "capacitor"
	checkFan         = "fan"
	checkHeatsink    = "heatsink"
	checkStorage     = "storage"
)

func ruleGroups() []ruleGroup {
	silence := slices.DeleteFunc(slices.Clone(dataQualityRules), func(r RuleInfo) bool { return r.ID != "data_quality.silent" })
	quality := slices.DeleteFunc(slices.Clone(dataQualityRules), func(r RuleInfo) bool { return r.ID == "data_quality.silent" })
	return []ruleGroup{
		{checkEnclosure, enclosureRules},
		{checkDerating, deratingRules},
		{checkDuty, dutyRules},
		{checkCabinet, cabinetRules},
		{checkDCBus, dcBusRules},
		{checkSilence, silence},
		{checkDataQuality, quality},
		{checkCapacitor, capacitorRules},
		{checkFan, fanRules},
		{checkHeatsink, heatsinkRules},
		{checkStorage, storageRules},
	}
}

// rulesOf returns the rule ids of the named checks.
func rulesOf(checks ...string) []string {
	var out []string
	for _, g := range ruleGroups() {
		if slices.Contains(checks, g.check) {
			for _, r := range g.rules {
				out = append(out, r.ID)
			}
		}
	}
	return out
}
