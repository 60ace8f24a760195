package health

import (
	"fmt"
	"math"
	"slices"
	"strings"
)

// This file judges an enclosure against the environment of the area it
// stands in. Sources: NEMA 250 Type definitions (published), IEC 60529 IP
// code and its Amendment 2 (digit 9), ISO 20653 K codes (from memory),
// ANSI/ISA-71.04-2013 severity levels (published) and the one-way NEMA to IP
// conversion that the tests pin (from memory).
//
// Severity scale. A check that finds the need above what the rating shows
// ranks the gap in steps on the ladder of its exposure:
//
//	water:  none 0, dripping 1, splashing 2, hose-down 4, hot washdown 5,
//	        temporary submersion 7 (submersion and hot washdown are different
//	        tests, so they stand further up than one step)
//	dust:   none 0, settling 1, circulating fibres 2, windblown 2,
//	        conductive 3; a rating shows 0 (no dust protection), 2
//	        (dust-protected, IP5X or a dust Type) or 3 (dust-tight, IP6X)
//	corrosion (enclosure and boards): G2 1, G3 2, GX 3 steps above G1
//	oil:    seepage 1, spray 2; a rating shows 0, seepage 1 or spray 2
//
// gap 1 is minor, gap 2 major, gap 3 or more critical. Adjustments, each
// stated in the rule: water with no water protection at all is at least
// major; a water need that the rating misses only because IEC 60529 digits
// 7, 8 and 9 do not imply 5 or 6 is at most major (at most minor when the
// rating shows high-pressure hot washdown and the need is hose-down); dust
// that is conductive and not excluded (below dust-tight) is at least major.
// These steps are kelvard's own scale (common practice in spirit, no
// published source).

// Verdict is the outcome of one enclosure or environment check.
type Verdict string

// Verdicts. Pass: the rating shows the need. Finding: the rating shows less
// than the need. Verify: the rating cannot show the need (an IP code says
// nothing of corrosion, ice, UV or oil; no rating shows anti-condensation
// measures), so someone must look. Outside judgement: a classified hazardous
// location, which kelvard does not judge.
const (
	VerdictPass    Verdict = "pass"
	VerdictFinding Verdict = "finding"
	VerdictVerify  Verdict = "verify"
	VerdictOutside Verdict = "outside_judgement"
)

// Verdicts returns every verdict, best first.
func Verdicts() []Verdict {
	return []Verdict{VerdictPass, VerdictVerify, VerdictFinding, VerdictOutside}
}

// EnclosureCheck is the verdict of one rule for one housing in one
// environment. Severity is set for findings (their rank on the scale in this
// file) and is advice for verify and outside-judgement items; it is empty for
// a pass.
type EnclosureCheck struct {
	Rule        string     `json:"rule"`
	Kind        Kind       `json:"kind"`
	Verdict     Verdict    `json:"verdict"`
	Severity    Severity   `json:"severity,omitempty"`
	Need        string     `json:"need"`
	RatingShows string     `json:"rating_shows"`
	Message     string     `json:"message"`
	Evidence    []Evidence `json:"evidence"`
	Remedy      string     `json:"remedy"`
}

// Housing is what stands between a drive and the area's air. Enclosure is
// the enclosure that meets the area: the drive's own when Mounting is
// own_enclosure, the cabinet's when Mounting is cabinet. BoardsCoated says
// whether the drive's circuit boards carry a conformal coating.
type Housing struct {
	Enclosure    Enclosure `json:"enclosure"`
	Mounting     Mounting  `json:"mounting"`
	BoardsCoated bool      `json:"boards_coated"`
}

// EnclosureReport is the outcome of JudgeEnclosure: every check that was
// made, the findings they raise, and whether the area lies outside kelvard's
// judgement.
type EnclosureReport struct {
	Checks []EnclosureCheck `json:"checks"`
	// Findings holds one Finding per check whose verdict is not pass:
	// findings with their own severity, and verify and outside-judgement
	// items as advice-severity findings, so that the planner sees what needs
	// a look on the same list as what needs work.
	Findings []Finding `json:"findings"`
	// OutsideJudgement is true for a classified hazardous location.
	OutsideJudgement bool `json:"outside_judgement"`
	// Note says which enclosure was judged for ingress and how the boards
	// were judged.
	Note string `json:"note"`
}

// Worst returns the worst verdict among the checks and, for a finding, its
// severity (outside judgement ranks worst, then finding by severity, then
// verify, then pass).
func (r EnclosureReport) Worst() (Verdict, Severity) {
	v, s := VerdictPass, Severity("")
	for _, c := range r.Checks {
		if verdictRank(c.Verdict, c.Severity) > verdictRank(v, s) {
			v, s = c.Verdict, c.Severity
		}
	}
	return v, s
}

func verdictRank(v Verdict, s Severity) int {
	switch v {
	case VerdictOutside:
		return 10
	case VerdictFinding:
		return 4 + s.Rank()
	case VerdictVerify:
		return 1
	}
	return 0
}

// enclosureRules lists every rule this file can raise.
var enclosureRules = []RuleInfo{
	{ID: "enclosure.outdoor", Kind: KindEnclosure, Title: "Indoor enclosure outdoors",
		Remedy: "Replace the enclosure with an outdoor Type (3, 3R, 3S, 4, 4X, 6, 6P or their X variants) or shelter the drive indoors."},
	{ID: "enclosure.water", Kind: KindEnclosure, Title: "Enclosure not rated for the water exposure",
		Remedy: "Fit an enclosure whose rating shows the exposure (see need), dual-coded where jets and immersion both occur, or move the drive out of the wet zone."},
	{ID: "enclosure.dust", Kind: KindEnclosure, Title: "Enclosure not rated for the dust",
		Remedy: "Fit a dust-protected enclosure (IP5X, Type 12 or better); for conductive dust a dust-tight one (IP6X); add filtered or closed-loop cooling."},
	{ID: "enclosure.oil", Kind: KindEnclosure, Title: "Enclosure not rated for oil",
		Remedy: "Fit a Type 12 or 12K enclosure for oil seepage, Type 13 for oil and coolant spray, or confirm oil-resistant gaskets with the maker."},
	{ID: "enclosure.corrosion", Kind: KindEnclosure, Title: "Enclosure not corrosion-resistant",
		Remedy: "Fit a corrosion-resistant enclosure (Type 4X, 6P or an X variant of 3, 3R, 3S): stainless steel, coated aluminium or suitable plastic."},
	{ID: "enclosure.ice", Kind: KindEnclosure, Title: "Ice resistance not shown",
		Remedy: "Use an outdoor Type (Type 3S or 3SX where external operators must work when ice-laden) or confirm the maker's outdoor and icing rating."},
	{ID: "enclosure.sun", Kind: KindEnclosure, Title: "Ultraviolet resistance not shown",
		Remedy: "Confirm the enclosure material, window and gaskets resist ultraviolet light, or shade the enclosure; check the solar heat gain in the cabinet heat balance."},
	{ID: "enclosure.condensation", Kind: KindEnclosure, Title: "Condensation protection to verify",
		Remedy: "Fit an anti-condensation heater with a thermostat or hygrostat, or use a drained and breathered enclosure; seal cable entries; keep stand-by drives energised."},
	{ID: "environment.board_corrosion", Kind: KindEnvironment, Title: "Circuit boards exposed to corrosive air",
		Remedy: "Use drives with conformally coated boards for G2 and G3; at GX use a sealed or purged (pressurised clean-air) enclosure and take specialist advice."},
	{ID: "environment.hazardous_location", Kind: KindEnvironment, Title: "Classified hazardous location",
		Remedy: "Outside kelvard's judgement: use equipment listed for the location's class, follow local code and the area classification drawings."},
}

// enclosureRule returns the catalogue entry of a rule in enclosureRules
// (the tests hold every rule raised to an entry there).
func enclosureRule(id string) RuleInfo {
	for _, r := range enclosureRules {
		if r.ID == id {
			return r
		}
	}
	return RuleInfo{ID: id}
}

// silentWhy says why the rating cannot show a need that only NEMA Types
// address: the enclosure has IP codes only, a hazardous-location Type, or no
// rating at all.
func silentWhy(p protection, what string) string {
	switch {
	case p.ip:
		return "an IP code says nothing of " + what
	case p.hazardous:
		return "the hazardous-location Type's protection against " + what + " is not in kelvard's table"
	}
	return "no rating is registered"
}

// waterWeight places each water exposure on the severity ladder described at
// the top of this file.
func waterWeight(w Water) int {
	switch w {
	case WaterDripping:
		return 1
	case WaterSplashing:
		return 2
	case WaterHoseDown:
		return 4
	case WaterHotWashdown:
		return 5
	case WaterTemporarySubmersion:
		return 7
	}
	return 0
}

// Dust protection levels a rating can show.
const (
	dustShowsNone      = 0
	dustShowsProtected = 2 // IP5X, NEMA dust Types
	dustShowsTight     = 3 // IP6X
)

// dustNeed is the dust protection level each dust exposure needs: IP5X for
// settling, circulating and windblown dust; IP6X (dust-tight) for conductive
// dust such as carbon or metal fines (common practice).
func dustNeed(d Dust) (need, weight int) {
	switch d {
	case DustSettling:
		return dustShowsProtected, 1
	case DustFibres, DustWindblown:
		return dustShowsProtected, 2
	case DustConductive:
		return dustShowsTight, 3
	}
	return 0, 0
}

// ipWaterShows returns the water exposures one IP code shows (IEC 60529):
// second digits up to 6 imply every lower one; 7 and 8 (immersion) and 9
// (high-pressure hot washdown, Amd 2; ISO 20653 9K the same idea) do not
// imply 5 or 6 unless dual-coded. kelvard reads 7, 8 and 9 as implying 1 to
// 4 and 8 as implying 7 (from memory). 4K and 6K (ISO 20653) count as 4 and
// 6.
func ipWaterShows(c IPCode) []Water {
	d := c.Water
	var out []Water
	if d >= 1 {
		out = append(out, WaterDripping)
	}
	if d >= 4 {
		out = append(out, WaterSplashing)
	}
	switch {
	case d == 5 || d == 6:
		out = append(out, WaterHoseDown)
	case d == 7 || d == 8:
		out = append(out, WaterTemporarySubmersion)
	case d == 9:
		out = append(out, WaterHotWashdown)
	}
	return out
}

// ipDustShows returns the dust level of one IP code: first digit 5 is
// dust-protected, 6 dust-tight (IEC 60529); lower digits keep out objects,
// not dust.
func ipDustShows(c IPCode) int {
	switch c.Solids {
	case 5:
		return dustShowsProtected
	case 6:
		return dustShowsTight
	}
	return dustShowsNone
}

// nemaProfile is what a NEMA 250 Type shows by its published definition,
// joined with the IP code it meets at least (the pinned conversion).
type nemaProfile struct {
	outdoor   bool // indoor or outdoor use
	ice       bool // undamaged by external ice
	iceOps    bool // external mechanisms operable when ice-laden (3S)
	corrosion bool // corrosion protection (X, 4X, 6P)
	water     []Water
	dust      int
	oil       Oil
	minIP     IPCode
}

// nemaProfileOf returns the profile of a Type, and false for the hazardous
// location Types 7 to 10 (and unknown Types), whose ingress protection
// kelvard does not state.
func nemaProfileOf(t NEMAType) (nemaProfile, bool) {
	ip := func(s, w int) IPCode { return IPCode{Solids: s, Water: w} }
	drip := []Water{WaterDripping}
	var p nemaProfile
	base := t
	switch t {
	case "3X", "3RX", "3SX":
		base = NEMAType(strings.TrimSuffix(string(t), "X"))
		p.corrosion = true
	}
	switch base {
	case "1":
		p.minIP = ip(1, 0)
	case "2":
		p.water, p.minIP = drip, ip(1, 1)
	case "3":
		p.outdoor, p.ice, p.dust, p.water, p.minIP = true, true, dustShowsProtected, drip, ip(5, 4)
	case "3R":
		p.outdoor, p.ice, p.water, p.minIP = true, true, drip, ip(1, 4)
	case "3S":
		p.outdoor, p.ice, p.iceOps, p.dust, p.water, p.minIP = true, true, true, dustShowsProtected, drip, ip(5, 4)
	case "4", "4X":
		p.outdoor, p.ice, p.dust, p.minIP = true, true, dustShowsProtected, ip(5, 6)
		p.water = []Water{WaterDripping, WaterSplashing, WaterHoseDown}
		p.corrosion = base == "4X"
	case "5":
		p.dust, p.water, p.minIP = dustShowsProtected, drip, ip(5, 2)
	case "6", "6P":
		p.outdoor, p.ice, p.dust, p.minIP = true, true, dustShowsProtected, ip(6, 7)
		p.water = []Water{WaterDripping, WaterSplashing, WaterHoseDown, WaterTemporarySubmersion}
		p.corrosion = base == "6P"
	case "12", "12K":
		p.dust, p.water, p.oil, p.minIP = dustShowsProtected, drip, OilSeepage, ip(5, 2)
	case "13":
		p.dust, p.oil, p.minIP = dustShowsProtected, OilSpray, ip(5, 4)
		p.water = []Water{WaterDripping, WaterSplashing}
	default:
		return nemaProfile{}, false
	}
	for _, w := range ipWaterShows(p.minIP) {
		if !slices.Contains(p.water, w) {
			p.water = append(p.water, w)
		}
	}
	p.dust = max(p.dust, ipDustShows(p.minIP))
	return p, true
}

// NEMAMinimumIP returns the IEC 60529 IP code that a NEMA 250 Type meets at
// least. The conversion runs one way only: an IP code never implies a Type,
// because NEMA Types also cover corrosion, ice, oil and construction that IP
// codes do not test. Table (from memory; two versions circulate and kelvard
// pins this one): 1 IP10, 2 IP11, 3 and 3X IP54, 3R and 3RX IP14, 3S and 3SX
// IP54, 4 and 4X IP56, 5 IP52, 6 and 6P IP67, 12 and 12K IP52, 13 IP54. The
// hazardous-location Types 7 to 10 have no entry (false).
func NEMAMinimumIP(t NEMAType) (IPCode, bool) {
	p, ok := nemaProfileOf(t)
	if !ok {
		return IPCode{}, false
	}
	return p.minIP, true
}

// protection is what a whole Enclosure shows: the union of its NEMA Type and
// every IP code it is marked with, since it meets each of them.
type protection struct {
	nema       bool // a judged (non-hazardous) NEMA Type is present
	hazardous  bool // a hazardous-location Type is present
	ip         bool // at least one IP code is present
	waterKnown bool // some part states water protection
	dustKnown  bool // some part states solids protection
	water      []Water
	ipWater    []Water // water shown by the marked IP codes alone
	dust       int
	nemaP      nemaProfile
}

func protectionOf(e Enclosure) protection {
	var p protection
	if e.NEMA != "" {
		if np, ok := nemaProfileOf(e.NEMA); ok {
			p.nema, p.nemaP = true, np
			p.waterKnown, p.dustKnown = true, true
			p.water = slices.Clone(np.water)
			p.dust = np.dust
		} else {
			p.hazardous = true
		}
	}
	for _, c := range e.IP {
		p.ip = true
		if c.Water >= 0 {
			p.waterKnown = true
			for _, w := range ipWaterShows(c) {
				if !slices.Contains(p.water, w) {
					p.water = append(p.water, w)
				}
				if !slices.Contains(p.ipWater, w) {
					p.ipWater = append(p.ipWater, w)
				}
			}
		}
		if c.Solids >= 0 {
			p.dustKnown = true
			p.dust = max(p.dust, ipDustShows(c))
		}
	}
	slices.SortFunc(p.water, func(a, b Water) int { return waterWeight(a) - waterWeight(b) })
	return p
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

func gapSeverity(gap int) Severity {
	switch {
	case gap >= 3:
		return SeverityCritical
	case gap == 2:
		return SeverityMajor
	default:
		return SeverityMinor
	}
}

func atLeast(s, floor Severity) Severity {
	if s.Rank() < floor.Rank() {
		return floor
	}
	return s
}

func atMost(s, ceiling Severity) Severity {
	if s.Rank() > ceiling.Rank() {
		return ceiling
	}
	return s
}

// typesShowing lists the non-hazardous NEMA Types whose profile satisfies
// ok, for need texts.
func typesShowing(ok func(nemaProfile) bool) string {
	var names []string
	for _, t := range nemaTypes {
		if p, known := nemaProfileOf(t); known && ok(p) {
			names = append(names, string(t))
		}
	}
	if len(names) == 0 {
		return "no NEMA Type"
	}
	return "Type " + strings.Join(names, ", ")
}

// waterWords names a water exposure in plain words.
func waterWords(w Water) string {
	switch w {
	case WaterHoseDown:
		return "hose-down"
	case WaterHotWashdown:
		return "high-pressure hot washdown"
	}
	return strings.ReplaceAll(string(w), "_", " ")
}

func waterList(ws []Water) string {
	if len(ws) == 0 {
		return "no protection against water"
	}
	parts := make([]string, len(ws))
	for i, w := range ws {
		parts[i] = waterWords(w)
	}
	return "water: " + strings.Join(parts, ", ")
}

func dustText(level int) string {
	switch level {
	case dustShowsTight:
		return "dust-tight (IP6X)"
	case dustShowsProtected:
		return "dust-protected (IP5X)"
	}
	return "no protection against dust"
}

// waterNeedText names the IP digit and the NEMA Types that show an exposure.
func waterNeedText(w Water) string {
	ip := map[Water]string{
		WaterDripping:            "IPX1 or better",
		WaterSplashing:           "IPX4 or better",
		WaterHoseDown:            "IPX5 or IPX6 (water jets)",
		WaterHotWashdown:         "IPX9 or IPX9K (high-pressure hot washdown)",
		WaterTemporarySubmersion: "IPX7 or IPX8 (immersion)",
	}[w]
	return fmt.Sprintf("%s for %s water; %s", ip, waterWords(w),
		typesShowing(func(p nemaProfile) bool { return slices.Contains(p.water, w) }))
}

// effectiveCorrosion is the level the enclosure must resist: the area's
// ISA-71.04 level, raised to G2 where the air is salt-laden.
func effectiveCorrosion(env Environment) Corrosion {
	c := env.Corrosion
	if !c.Valid() {
		c = CorrosionG1
	}
	if env.SaltAir && c.Rank() < CorrosionG2.Rank() {
		c = CorrosionG2
	}
	return c
}

// JudgeEnclosure judges a housing against the environment of its area.
//
// Rules and what they compare (sources in brackets):
//   - environment.hazardous_location: a classified hazardous area is outside
//     kelvard's judgement; no other check is made, since equipment there
//     must be listed for the location (NEMA 250 Types 7 to 10 are such
//     Types; local code decides).
//   - enclosure.outdoor: outdoors needs an outdoor NEMA Type (3, 3R, 3S, 4,
//     4X, 6, 6P and X variants). An indoor-only Type is critical, or major
//     when the enclosure is also marked with an IP code that shows
//     splashing water (rain kept out). With IP codes only:
//     no water digit critical, IPX1 to IPX3 major, IPX4 and up verify, as an
//     IP code says nothing of UV, ice or outdoor use [NEMA 250, IEC 60529].
//   - enclosure.water: the area's water exposure against the water the
//     rating shows [IEC 60529 digits and Amd 2; NEMA 250 Types].
//   - enclosure.dust: settling, circulating and windblown dust need IP5X or a
//     dust Type; conductive dust needs IP6X [IEC 60529; NEMA 250; common
//     practice for conductive dust].
//   - enclosure.oil: seepage needs Type 12, 12K or 13; spray needs Type 13
//     [NEMA 250]. IP codes cannot show it: verify.
//   - enclosure.corrosion: salt air or ISA-71.04 G2 and worse needs a
//     corrosion-resistant Type (X suffix, 4X, 6P) [NEMA 250]; IP codes
//     cannot show it: verify. Salt-laden air counts as G2 (common practice).
//   - enclosure.ice: outdoors with a design minimum at or below 0 °C; outdoor
//     Types show it [NEMA 250]; IP codes cannot: verify.
//   - enclosure.sun: partial or full sun; outdoor Types pass (NEMA 250 / UL
//     50E outdoor Types include an ultraviolet test for non-metallic
//     enclosures, from memory); everything else verify.
//   - enclosure.condensation: no rating shows anti-condensation measures:
//     always verify when the area has condensation (common practice).
//   - environment.board_corrosion: uncoated boards at ISA-71.04 G2 minor, G3
//     major, GX critical; coated boards pass at G2 and G3 and are verify at
//     GX, where a sealed or purged enclosure and specialist advice are
//     needed [ANSI/ISA-71.04-2013 levels; conformal coating is common
//     practice]. Salt air alone does not raise the board level: measure the
//     area with coupons (ClassifyCorrosion).
//
// For a drive in a cabinet, the cabinet's rating is judged for ingress and
// the drive's boards are judged by their coating against the corrosion
// level: a cabinet that is not sealed and purged shares the area's air.
// Severities follow the scale at the top of this file. Validity: the
// Environment's enumerations must be valid (Environment.Validate); unknown
// values are read as the mildest.
func JudgeEnclosure(env Environment, h Housing) EnclosureReport {
	var r EnclosureReport
	encl := h.Enclosure.String()
	if encl == "" {
		encl = "no registered rating"
	}
	where := "the drive's own enclosure"
	if h.Mounting == MountingCabinet {
		where = "the cabinet around the drive"
	}
	r.Note = fmt.Sprintf("Ingress is judged on %s (%s).", where, encl)
	if h.Mounting == MountingCabinet {
		r.Note += " The drive's boards are judged by their coating against the area's corrosion level, since a cabinet that is not sealed and purged shares the area's air."
	}
	encEv := Evidence{Name: "enclosure", Value: encl, Source: "register"}

	add := func(c EnclosureCheck) {
		info := enclosureRule(c.Rule)
		c.Kind = info.Kind
		if c.Remedy == "" {
			c.Remedy = info.Remedy
			if c.Verdict == VerdictVerify {
				c.Remedy = "Confirm with the maker's documentation or by inspection; if it is not shown: " +
					strings.ToLower(info.Remedy[:1]) + info.Remedy[1:]
			}
		}
		switch c.Verdict {
		case VerdictPass:
			c.Severity = ""
		case VerdictVerify, VerdictOutside:
			c.Severity = SeverityAdvice
		}
		r.Checks = append(r.Checks, c)
		if c.Verdict != VerdictPass {
			r.Findings = append(r.Findings, Finding{PhysicalWork: true, Rule: c.Rule, Kind: c.Kind, Severity: c.Severity,
				Message: c.Message, Evidence: c.Evidence, Remedy: c.Remedy})
		}
	}

	if env.HazardousClass {
		r.OutsideJudgement = true
		add(EnclosureCheck{
			Rule: "environment.hazardous_location", Verdict: VerdictOutside,
			Need:        "equipment listed for the classified location",
			RatingShows: encl,
			Message: "The area is a classified hazardous location: choosing and judging equipment there is outside kelvard's judgement. " +
				"Defer to local code, the area classification and equipment listed for the location (NEMA 250 Types 7 to 10 are such Types).",
			Evidence: []Evidence{{Name: "hazardous_classified", Value: true, Source: "area register"}, encEv},
		})
		return r
	}

	p := protectionOf(h.Enclosure)
	judgeOutdoor(env, p, encEv, add)
	judgeWater(env, p, encEv, add)
	judgeDust(env, p, encEv, add)
	judgeOil(env, h.Enclosure, p, encEv, add)
	judgeCorrosion(env, h.Enclosure, p, encEv, add)
	judgeIce(env, h.Enclosure, p, encEv, add)
	judgeSun(env, h.Enclosure, p, encEv, add)
	judgeCondensation(env, encEv, add)
	judgeBoards(env, h, add)
	return r
}

func judgeOutdoor(env Environment, p protection, encEv Evidence, add func(EnclosureCheck)) {
	c := EnclosureCheck{Rule: "enclosure.outdoor", Need: "indoor use",
		Evidence: []Evidence{{Name: "location", Value: string(env.Location), Source: "area register"}, encEv}}
	if env.Location != Outdoor {
		c.Verdict, c.RatingShows, c.Message = VerdictPass, "indoor use", "The area is indoors."
		add(c)
		return
	}
	c.Need = "outdoor use: " + typesShowing(func(np nemaProfile) bool { return np.outdoor })
	// Rain protection counts only when a marked IP code shows it; the
	// conversion of an indoor-only Type does not make it an outdoor one.
	rain := slices.Contains(p.ipWater, WaterSplashing)
	switch {
	case p.nema && p.nemaP.outdoor:
		c.Verdict, c.RatingShows = VerdictPass, "outdoor use (NEMA 250)"
		c.Message = "The NEMA Type is rated for outdoor use."
	case p.nema:
		c.Verdict, c.RatingShows = VerdictFinding, "indoor use only (NEMA 250)"
		if rain {
			c.Severity = SeverityMajor
			c.Message = "The enclosure's NEMA Type is for indoor use only, yet it stands outdoors. Its IP code shows splashing water, so rain is kept out, but ice, ultraviolet light and outdoor ageing are not covered."
		} else {
			c.Severity = SeverityCritical
			c.Message = "The enclosure's NEMA Type is for indoor use only, yet it stands outdoors: rain, ice and ultraviolet light are outside its rating."
		}
	case p.ip && rain:
		c.Verdict, c.RatingShows = VerdictVerify, "rain protection by the IP code; outdoor use not shown"
		c.Message = "Not shown by the rating: verify. The IP code shows splashing water, but an IP code says nothing of outdoor use, ultraviolet light or ice; confirm the maker rates the enclosure for outdoor installation."
	case p.ip && slices.Contains(p.ipWater, WaterDripping):
		c.Verdict, c.Severity, c.RatingShows = VerdictFinding, SeverityMajor, "dripping water only (IPX1 to IPX3)"
		c.Message = "The enclosure stands outdoors but its IP code shows only dripping water, not wind-driven rain (IPX4 or better) nor outdoor use."
	case p.ip && p.waterKnown:
		c.Verdict, c.Severity, c.RatingShows = VerdictFinding, SeverityCritical, "no protection against water"
		c.Message = "The enclosure stands outdoors but its IP code shows no protection against water: it is an indoor enclosure."
	default:
		c.Verdict, c.RatingShows = VerdictVerify, "not stated by the rating"
		c.Message = "Not shown by the rating: verify. The registered rating does not state whether the enclosure suits outdoor use."
	}
	add(c)
}

func judgeWater(env Environment, p protection, encEv Evidence, add func(EnclosureCheck)) {
	need := env.Water
	c := EnclosureCheck{Rule: "enclosure.water", RatingShows: waterList(p.water),
		Evidence: []Evidence{{Name: "water", Value: string(need), Source: "area register"}, encEv}}
	if waterWeight(need) == 0 {
		c.Verdict, c.Need, c.Message = VerdictPass, "no water exposure", "The area has no water exposure."
		add(c)
		return
	}
	c.Need = waterNeedText(need)
	c.Evidence[0].Limit = c.Need
	c.Evidence[0].Source = "IEC 60529 (incl. Amd 2); NEMA 250"
	switch {
	case slices.Contains(p.water, need):
		c.Verdict = VerdictPass
		c.Message = fmt.Sprintf("The rating shows protection against %s water.", waterWords(need))
	case !p.waterKnown:
		c.Verdict, c.RatingShows = VerdictVerify, "not stated by the rating"
		c.Message = "Not shown by the rating: verify. The registered rating does not state protection against water."
	default:
		shown, harsher := 0, Water("")
		for _, w := range p.water {
			if ww := waterWeight(w); ww < waterWeight(need) {
				shown = max(shown, ww)
			} else if harsher == "" {
				harsher = w
			}
		}
		sev := gapSeverity(waterWeight(need) - shown)
		if len(p.water) == 0 {
			sev = atLeast(sev, SeverityMajor)
		}
		msg := fmt.Sprintf("The area has %s water but the rating shows %s.", waterWords(need), strings.TrimPrefix(waterList(p.water), "water: "))
		if harsher != "" {
			ceiling := SeverityMajor
			if harsher == WaterHotWashdown && need == WaterHoseDown {
				ceiling = SeverityMinor
			}
			sev = atMost(sev, ceiling)
			msg += fmt.Sprintf(" It shows %s, which does not imply %s: IEC 60529 digits 7, 8 and 9 stand apart from 5 and 6 and from each other, so only a dual-coded enclosure (for example IP66/IP67) shows both. Ask the maker for a dual code or move the drive.",
				waterWords(harsher), waterWords(need))
		}
		c.Verdict, c.Severity, c.Message = VerdictFinding, sev, msg
	}
	add(c)
}

func judgeDust(env Environment, p protection, encEv Evidence, add func(EnclosureCheck)) {
	need, weight := dustNeed(env.Dust)
	c := EnclosureCheck{Rule: "enclosure.dust", RatingShows: dustText(p.dust),
		Evidence: []Evidence{{Name: "dust", Value: string(env.Dust), Source: "area register"}, encEv}}
	if weight == 0 {
		c.Verdict, c.Need, c.Message = VerdictPass, "no dust exposure", "The area has no dust exposure."
		add(c)
		return
	}
	c.Need = dustText(need) + "; " + typesShowing(func(np nemaProfile) bool { return np.dust >= need })
	c.Evidence[0].Limit = dustText(need)
	c.Evidence[0].Source = "IEC 60529; NEMA 250; conductive dust: common practice"
	kind := strings.ReplaceAll(string(env.Dust), "_", " ")
	switch {
	case p.dust >= need:
		c.Verdict = VerdictPass
		c.Message = fmt.Sprintf("The rating shows %s, enough for %s dust.", dustText(p.dust), kind)
	case !p.dustKnown:
		c.Verdict, c.RatingShows = VerdictVerify, "not stated by the rating"
		c.Message = "Not shown by the rating: verify. The registered rating does not state protection against dust."
	default:
		shown := 0
		if p.dust >= dustShowsProtected {
			shown = 2
		}
		sev := gapSeverity(weight - shown)
		if env.Dust == DustConductive {
			sev = atLeast(sev, SeverityMajor)
		}
		c.Verdict, c.Severity = VerdictFinding, sev
		c.Message = fmt.Sprintf("The area has %s dust but the rating shows %s; %s is needed.", kind, dustText(p.dust), dustText(need))
		if env.Dust == DustConductive {
			c.Message += " Conductive dust that gets in can track across live parts."
		}
	}
	add(c)
}

func oilWeight(o Oil) int {
	switch o {
	case OilSeepage:
		return 1
	case OilSpray:
		return 2
	}
	return 0
}

func judgeOil(env Environment, e Enclosure, p protection, encEv Evidence, add func(EnclosureCheck)) {
	c := EnclosureCheck{Rule: "enclosure.oil",
		Evidence: []Evidence{{Name: "oil", Value: string(env.Oil), Source: "area register"}, encEv}}
	need := oilWeight(env.Oil)
	shows := "oil not covered"
	if p.nema && p.nemaP.oil != "" && p.nemaP.oil != OilNone {
		shows = "oil " + string(p.nemaP.oil) + " (NEMA 250)"
	}
	c.RatingShows = shows
	if need == 0 {
		c.Verdict, c.Need, c.Message = VerdictPass, "no oil exposure", "The area has no oil exposure."
		add(c)
		return
	}
	c.Need = "oil " + string(env.Oil) + ": " + typesShowing(func(np nemaProfile) bool { return oilWeight(np.oil) >= need })
	c.Evidence[0].Limit = c.Need
	c.Evidence[0].Source = "NEMA 250"
	switch {
	case p.nema && oilWeight(p.nemaP.oil) >= need:
		c.Verdict = VerdictPass
		c.Message = fmt.Sprintf("Type %s shows protection against oil %s.", e.NEMA, env.Oil)
	case p.nema:
		c.Verdict, c.Severity = VerdictFinding, gapSeverity(need-oilWeight(p.nemaP.oil))
		c.Message = fmt.Sprintf("The area has oil %s but Type %s does not show protection against it; oil softens gaskets not made for it.", env.Oil, e.NEMA)
	default:
		c.Verdict, c.RatingShows = VerdictVerify, "not shown by the rating"
		c.Message = "Not shown by the rating: verify. " + upperFirst(silentWhy(p, "oil")) + "; confirm the gaskets and seals resist the oil in the area."
	}
	add(c)
}

func judgeCorrosion(env Environment, e Enclosure, p protection, encEv Evidence, add func(EnclosureCheck)) {
	level := effectiveCorrosion(env)
	c := EnclosureCheck{Rule: "enclosure.corrosion",
		Evidence: []Evidence{
			{Name: "corrosion", Value: string(env.Corrosion), Source: "area register (ANSI/ISA-71.04-2013 level)"},
			{Name: "salt_air", Value: env.SaltAir, Source: "area register"}, encEv}}
	c.RatingShows = "corrosion not covered"
	if p.nema && p.nemaP.corrosion {
		c.RatingShows = "corrosion-resistant (NEMA 250)"
	}
	if level.Rank() < CorrosionG2.Rank() {
		c.Verdict, c.Need, c.Message = VerdictPass, "no corrosion resistance needed (G1, no salt air)", "The air is not corrosive (ISA-71.04 G1, no salt)."
		add(c)
		return
	}
	c.Need = "corrosion resistance at " + string(level) + ": " + typesShowing(func(np nemaProfile) bool { return np.corrosion })
	c.Evidence[0].Limit = "G1"
	why := "ISA-71.04 level " + string(env.Corrosion)
	if env.SaltAir {
		why = "salt-laden air (counted as at least G2)"
		if env.Corrosion.Rank() >= CorrosionG2.Rank() {
			why = "salt-laden air and ISA-71.04 level " + string(env.Corrosion)
		}
	}
	switch {
	case p.nema && p.nemaP.corrosion:
		c.Verdict = VerdictPass
		c.Message = fmt.Sprintf("Type %s shows corrosion resistance for %s.", e.NEMA, why)
	case p.nema:
		c.Verdict, c.Severity = VerdictFinding, gapSeverity(level.Rank()-CorrosionG1.Rank())
		c.Message = fmt.Sprintf("The area has %s but Type %s is not a corrosion-resistant Type (X suffix, 4X or 6P).", why, e.NEMA)
	default:
		c.Verdict, c.RatingShows = VerdictVerify, "not shown by the rating"
		c.Message = fmt.Sprintf("Not shown by the rating: verify. The area has %s and %s; confirm the enclosure material and finish resist it.", why, silentWhy(p, "corrosion"))
	}
	add(c)
}

func judgeIce(env Environment, e Enclosure, p protection, encEv Evidence, add func(EnclosureCheck)) {
	c := EnclosureCheck{Rule: "enclosure.ice",
		Evidence: []Evidence{
			{Name: "location", Value: string(env.Location), Source: "area register"},
			{Name: "ambient_min_c", Value: env.AmbientMinC, Unit: "°C", Limit: 0.0, Source: "freezing point; common practice"}, encEv}}
	c.RatingShows = "ice not covered"
	if p.nema && p.nemaP.ice {
		c.RatingShows = "external ice (NEMA 250)"
	}
	if env.Location != Outdoor || math.IsNaN(env.AmbientMinC) || env.AmbientMinC > 0 {
		c.Verdict, c.Need, c.Message = VerdictPass, "no icing", "The enclosure is indoors or the design minimum stays above freezing."
		add(c)
		return
	}
	c.Need = "undamaged by external ice: " + typesShowing(func(np nemaProfile) bool { return np.ice })
	switch {
	case p.nema && p.nemaP.ice:
		c.Verdict = VerdictPass
		c.Message = fmt.Sprintf("Type %s is undamaged by external ice.", e.NEMA)
		if !p.nemaP.iceOps {
			c.Message += " Only Type 3S and 3SX show external operators working when ice-laden; check any external handle."
		}
	case p.nema:
		c.Verdict, c.Severity = VerdictFinding, SeverityMinor
		c.Message = fmt.Sprintf("The enclosure stands outdoors with frost but Type %s is not tested against external ice (the outdoor finding carries the main weight).", e.NEMA)
	default:
		c.Verdict, c.RatingShows = VerdictVerify, "not shown by the rating"
		c.Message = "Not shown by the rating: verify. The design minimum is at or below freezing and " + silentWhy(p, "ice") + "; confirm the maker's rating for icing."
	}
	add(c)
}

func judgeSun(env Environment, e Enclosure, p protection, encEv Evidence, add func(EnclosureCheck)) {
	c := EnclosureCheck{Rule: "enclosure.sun",
		Evidence: []Evidence{{Name: "sun", Value: string(env.Sun), Source: "area register"}, encEv}}
	c.RatingShows = "ultraviolet resistance not shown"
	if p.nema && p.nemaP.outdoor {
		c.RatingShows = "outdoor Type (NEMA 250 / UL 50E ultraviolet test for non-metallic enclosures, from memory)"
	}
	if env.Sun != SunPartial && env.Sun != SunFull {
		c.Verdict, c.Need, c.Message = VerdictPass, "no direct sun", "The enclosure is out of direct sun."
		add(c)
		return
	}
	c.Need = "ultraviolet resistance of the enclosure, window and gaskets"
	if p.nema && p.nemaP.outdoor {
		c.Verdict = VerdictPass
		c.Message = fmt.Sprintf("Type %s is an outdoor Type; its outdoor tests include ultraviolet exposure for non-metallic enclosures (from memory). Sun still heats the enclosure: see the cabinet heat balance.", e.NEMA)
	} else {
		c.Verdict = VerdictVerify
		c.Message = "Not shown by the rating: verify. The enclosure is in the sun and its rating says nothing of ultraviolet light; confirm the material, any window and the gaskets resist it. Sun also heats the enclosure: see the cabinet heat balance."
	}
	add(c)
}

func judgeCondensation(env Environment, encEv Evidence, add func(EnclosureCheck)) {
	c := EnclosureCheck{Rule: "enclosure.condensation", RatingShows: "no rating shows anti-condensation measures",
		Evidence: []Evidence{{Name: "condensation", Value: env.Condensation, Source: "area register"}, encEv}}
	if !env.Condensation {
		c.Verdict, c.Need, c.Message = VerdictPass, "no condensation", "The area is not prone to condensation."
		add(c)
		return
	}
	c.Need = "anti-condensation heating, or a drained and breathered enclosure (common practice)"
	c.Verdict = VerdictVerify
	c.Message = "Not shown by the rating: verify. The area is prone to condensation; a sealed enclosure can trap moisture that condenses on boards when it cools. Confirm an anti-condensation heater or a drain and breather is fitted."
	add(c)
}

func judgeBoards(env Environment, h Housing, add func(EnclosureCheck)) {
	level := env.Corrosion
	if !level.Valid() {
		level = CorrosionG1
	}
	coat := "uncoated boards"
	if h.BoardsCoated {
		coat = "conformally coated boards"
	}
	c := EnclosureCheck{Rule: "environment.board_corrosion", RatingShows: coat,
		Evidence: []Evidence{
			{Name: "corrosion", Value: string(level), Limit: "G1 uncoated; G2-G3 coated", Source: "ANSI/ISA-71.04-2013 levels; conformal coating: common practice"},
			{Name: "boards_coated", Value: h.BoardsCoated, Source: "drive model register"}}}
	inCabinet := ""
	if h.Mounting == MountingCabinet {
		inCabinet = " The drive stands in a cabinet: the cabinet is judged for ingress, the boards by their coating, since an unsealed, unpurged cabinet shares the area's air."
	}
	switch {
	case level.Rank() <= CorrosionG1.Rank():
		c.Verdict, c.Need = VerdictPass, "none at G1"
		c.Message = "The air is ISA-71.04 G1 (mild): no board protection is needed."
	case level == CorrosionGX:
		c.Need = "a sealed or purged enclosure and specialist advice (GX)"
		if h.BoardsCoated {
			c.Verdict = VerdictVerify
			c.Message = "Not shown by the rating: verify. The air is ISA-71.04 GX (severe): conformal coating alone is not shown to be enough; a sealed or purged enclosure and specialist advice are needed." + inCabinet
		} else {
			c.Verdict, c.Severity = VerdictFinding, SeverityCritical
			c.Message = "The air is ISA-71.04 GX (severe) and the boards are uncoated: expect early failures from corroded copper and silver." + inCabinet
		}
	default:
		c.Need = "conformally coated boards at " + string(level)
		if h.BoardsCoated {
			c.Verdict = VerdictPass
			c.Message = fmt.Sprintf("The air is ISA-71.04 %s and the boards are conformally coated.", level)
		} else {
			c.Verdict, c.Severity = VerdictFinding, gapSeverity(level.Rank()-CorrosionG1.Rank())
			c.Message = fmt.Sprintf("The air is ISA-71.04 %s and the boards are uncoated; conformal coating is the usual answer at G2 and G3.", level) + inCabinet
		}
	}
	add(c)
}

// ClassifyCorrosion returns the ANSI/ISA-71.04-2013 severity level from
// reactive-coupon film growth normalised to 30 days, in ångström. Copper:
// G1 < 300, G2 < 1000, G3 < 2000, GX >= 2000. Silver: G1 < 200, G2 < 1000,
// G3 < 2000, GX >= 2000 (published limits). The level is the worse of the
// two metals; pass NaN for a metal that was not measured. Validity: film
// growth of 0 and up; at least one metal measured.
func ClassifyCorrosion(copperA, silverA float64) (Corrosion, error) {
	if math.IsNaN(copperA) && math.IsNaN(silverA) {
		return "", fmt.Errorf("classify corrosion: neither copper nor silver reactivity was given")
	}
	level := CorrosionG1
	for _, m := range []struct {
		name string
		a    float64
		g1   float64
	}{{"copper", copperA, 300}, {"silver", silverA, 200}} {
		if math.IsNaN(m.a) {
			continue
		}
		if m.a < 0 || math.IsInf(m.a, 0) {
			return "", fmt.Errorf("classify corrosion: %s reactivity %v Å is not a film thickness", m.name, m.a)
		}
		l := CorrosionGX
		switch {
		case m.a < m.g1:
			l = CorrosionG1
		case m.a < 1000:
			l = CorrosionG2
		case m.a < 2000:
			l = CorrosionG3
		}
		if l.Rank() > level.Rank() {
			level = l
		}
	}
	return level, nil
}

// ReactivityPer30Days scales a coupon's film growth over an exposure of
// days to the 30-day basis of ISA-71.04: filmA × 30 / days. Linear scaling
// is common practice for exposures near 30 days (film growth slows with
// time, so a much longer exposure understates the rate). Validity: days > 0.
func ReactivityPer30Days(filmA, days float64) (float64, error) {
	if !(days > 0) || math.IsInf(days, 0) {
		return 0, fmt.Errorf("reactivity per 30 days: exposure of %v days is not positive", days)
	}
	if !(filmA >= 0) {
		return 0, fmt.Errorf("reactivity per 30 days: film growth %v Å is not a thickness", filmA)
	}
	return filmA * 30 / days, nil
}
