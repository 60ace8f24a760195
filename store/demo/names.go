package demo

// This file holds every name and every piece of text the demo scenario
// writes: sites, areas, makers, models, tags, serial prefixes, parts,
// descriptions and notes. All of them are invented for this scenario; no
// real place, utility, company, brand or product is named. Keeping them in
// one file lets a test check that every name in the generated CSV files is
// built only from the words written here (TestNamesComeFromTheWordLists).

// Sites.
const (
	nameUtility    = "Teshalune Coast Water"
	siteIntake     = "Orrimund River Intake"
	siteWorks      = "Kovrinth Hill Treatment Works"
	siteBoosters   = "Pellidar Coast Boosters"
	siteLift       = "Vaskerell Sewerage Network"
	siteWastewater = "Vaskerell Bay Wastewater Works"
	// zoneName is the time zone of every site: a fixed offset of UTC+2,
	// written in the IANA "Etc" form, which names no place.
	zoneName = "Etc/GMT-2"
)

// Areas.
const (
	areaIntakeDeck    = "Intake screen deck"
	areaDosing        = "Chemical dosing room"
	areaFilters       = "Filter gallery"
	areaHighLift      = "High-lift pump hall"
	areaStores        = "Stores room"
	areaKiosksSun     = "Booster kiosks, sun-facing"
	areaKiosksShade   = "Booster kiosks, shaded"
	areaLiftPanels    = "Lift station panel rooms"
	areaDewatering    = "Sludge dewatering hall"
	areaBlowers       = "Aeration blower house"
	areaCoolingTowers = "Cooling-tower platform"
)

// Makers and drive models.
const (
	makerKV = "Kestavar Drives"
	makerTQ = "Tolquinne Power"

	modelKV11  = "KV-400-11"
	modelKV11X = "KV-400-11X"
	modelKV45  = "KV-400-45"
	modelKV45X = "KV-400-45X"
	modelKV110 = "KV-400-110"
	modelTQ7   = "TQ-400-7"
	modelTQ7X  = "TQ-400-7X"
	modelTQ22  = "TQ-400-22"

	// Serial numbers are the maker's prefix, the year and week of
	// manufacture and a running number: "KV2214-00517".
	serialPrefixKV = "KV"
	serialPrefixTQ = "TQ"
	serialFormat   = "%s%02d%02d-%05d"
)

// Parts fitted by component replacements: "<maker>-CK-<size>" capacitor
// kits and "<maker>-FK-<size>" fan kits.
const (
	partCapacitorFormat = "%s-CK-%s capacitor kit"
	partFanFormat       = "%s-FK-%s fan kit"
)

// Position tag prefixes, one per area.
const (
	tagIntake    = "INT"
	tagDosing    = "DOS"
	tagFilters   = "FLT"
	tagHighLift  = "HLP"
	tagBoosters  = "BST"
	tagLift      = "LFT"
	tagDewater   = "DEW"
	tagBlowers   = "AER"
	tagTowers    = "CTF"
	tagFormat    = "%s-%s%02d"
	tagKindPump  = "P"
	tagKindScr   = "S"
	tagKindWash  = "W"
	tagKindDrain = "D"
	tagKindBlow  = "B"
	tagKindCent  = "C"
	tagKindConv  = "V"
	tagKindMix   = "X"
	tagKindFan   = "F"
)

// Position descriptions ("%d" is a running number).
const (
	descScourPump      = "River scour pump, temporary drive left in place"
	descRawWaterPump   = "Raw water pump %d"
	descBandScreen     = "Band screen %d"
	descScreenWash     = "Screen wash pump %d"
	descSumpDrainer    = "Screen chamber sump drainer"
	descDosingPump     = "Coagulant dosing pump %d"
	descHypoPump       = "Hypochlorite dosing pump %d"
	descWashwaterPump  = "Washwater recovery pump %d"
	descBackwashPump   = "Backwash pump %d"
	descAirScour       = "Air scour blower %d"
	descHighLiftPump   = "High-lift pump %d"
	descBoosterPump    = "Booster pump, kiosk %d"
	descLiftPump       = "Lift station %d, pump %s"
	descCentrifuge     = "Decanter centrifuge %d, bowl drive"
	descSludgeFeed     = "Sludge feed pump %d"
	descCakeConveyor   = "Cake conveyor %d"
	descPolymerMixer   = "Polymer make-up mixer, loose drive on the hall floor"
	descAerationBlower = "Aeration blower %d"
	descTowerFan       = "Cooling-tower fan %d"
	liftPumpDuty       = "A"
	liftPumpStandby    = "B"
)

// Notes on sites, areas, models, positions and drives.
const (
	noteSiteIntake     = "Raw water intake on the river mouth, for " + nameUtility + "; salt-laden air off the coast."
	noteSiteWorks      = "Treatment works on the hill, 900 m up; inland, no salt air."
	noteSiteBoosters   = "Small unvented booster kiosks along the coast road network."
	noteSiteLift       = "Sewage lift stations along the coast; hydrogen sulphide in the wet wells."
	noteSiteWastewater = "Coastal wastewater works with sludge dewatering and a biogas engine cooling loop."

	noteAreaIntake    = "Open deck over the screen chamber, full sun, spray and windblown sand."
	noteAreaDosing    = "Coagulant and hypochlorite fumes; copper coupons read G3."
	noteAreaFilters   = "Clean, dry gallery with filtered supply air."
	noteAreaHighLift  = "Hot hall: large motors and little ventilation."
	noteAreaStores    = "Dry, mild stores for spare drives and parts."
	noteAreaKioskSun  = "Small steel kiosks facing the sun, no ventilation."
	noteAreaKioskShad = "Small steel kiosks in the shade, no ventilation."
	noteAreaLift      = "Hydrogen sulphide from the wet wells, condensation at night; coupons read GX."
	noteAreaDewater   = "Hall floor and machines cleaned with hoses every shift."
	noteAreaBlowers   = "Blower house beside the aeration lanes."
	noteAreaTowers    = "Exposed platform beside the cooling towers; drift spray and sun."

	noteModelKV11  = "Compact wall-mount drive; runs warm inside its sealed case."
	noteModelKV11X = "Compact drive in a sealed corrosion-resistant case."
	noteModelKV45  = "Wall-mount drive for pumps and blowers."
	noteModelKV45X = "Drive in a sealed corrosion-resistant case for wet and outdoor places."
	noteModelKV110 = "Floor-standing drive; fan runs only when the heatsink is warm."
	noteModelTQ7   = "Open chassis for mounting inside a cabinet; boards not coated."
	noteModelTQ7X  = "Budget drive in a sealed case; boards not coated."
	noteModelTQ22  = "General-purpose indoor drive; boards not coated."

	notePosScour      = "Fitted as a temporary drive during works and never replaced."
	notePosCabinet    = "Sealed cabinet on the sunny wall; the drive trips on heat on summer afternoons."
	notePosDosingOld  = "Drive taken from the old dosing skid; boards not coated."
	notePosCarrier    = "Carrier raised to quieten the gallery for visitors."
	notePosKioskHot   = "Capacitor kit deferred in two budget rounds."
	notePosSinglePh   = "Fed from a single-phase rural spur; no derate set."
	notePosSilent     = "Gateway link lost after a storm."
	notePosRegen      = "Deceleration ramp shortened to raise throughput."
	notePosRipple     = "Duty blower; runs every day."
	noteDriveShelved  = "Strategic spare shelved in the wrong bay and missed by the energising rounds."
	noteDriveSpareNew = "Bought as a spare; energised in the half-yearly energising rounds."
)

// Notes on events and components.
const (
	noteFailureSwap      = "Failed in service; swapped for a spare."
	noteFailureNoSpare   = "Failed in service; no spare in stores, a new drive was bought."
	noteFanFailed        = "Fan seized; drive tripped on heat and the fan was replaced in place."
	noteCapRepair        = "Capacitor kit replaced in the workshop after a failure."
	noteCapPreventive    = "Capacitor kit replaced by plan before end of calculated life."
	noteFanRepair        = "Fan kit replaced in place after a failure."
	noteFanPreventive    = "Fan kit replaced by plan."
	noteTripReset        = "Reset by the operator."
	noteTripDecel        = "Tripped on bus over-voltage while the bowl was slowing down."
	noteTripHot          = "Tripped on heat on a hot afternoon."
	noteCompInitialBatch = "Kit from the current batch."
)
