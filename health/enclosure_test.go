package health

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// goldenUpdate reports whether the tests run with -update, which rewrites
// golden files under testdata/. The flag is defined once for the package (see
// weibull_test.go) and read here through the flag set, so that several test
// files may share it.
func goldenUpdate() bool {
	f := flag.Lookup("update")
	if f == nil {
		return false
	}
	g, ok := f.Value.(flag.Getter)
	if !ok {
		return false
	}
	b, _ := g.Get().(bool)
	return b
}

// baseEnv is a benign indoor area: every single-value environment in the
// tests below starts from it and changes one field.
func baseEnv() Environment {
	return Environment{Location: Indoor, Sun: SunNone, AmbientMinC: 5, AmbientMaxC: 35,
		Water: WaterNone, Dust: DustNone, Oil: OilNone, Corrosion: CorrosionG1}
}

func mustEnclosure(t testing.TB, nema, ip string) Enclosure {
	t.Helper()
	e, err := ParseEnclosure(nema, ip)
	if err != nil {
		t.Fatal(err)
	}
	return e
}

func checkOf(t testing.TB, r EnclosureReport, rule string) EnclosureCheck {
	t.Helper()
	for _, c := range r.Checks {
		if c.Rule == rule {
			return c
		}
	}
	t.Fatalf("no %s check in %+v", rule, r.Checks)
	return EnclosureCheck{}
}

// TestNEMAMinimumIP pins the one-way NEMA 250 to IEC 60529 conversion. The
// table is from memory (two versions circulate; kelvard pins this one).
func TestNEMAMinimumIP(t *testing.T) {
	want := map[NEMAType]string{
		"1": "IP10", "2": "IP11", "3": "IP54", "3X": "IP54", "3R": "IP14", "3RX": "IP14",
		"3S": "IP54", "3SX": "IP54", "4": "IP56", "4X": "IP56", "5": "IP52",
		"6": "IP67", "6P": "IP67", "12": "IP52", "12K": "IP52", "13": "IP54",
	}
	for _, ty := range NEMATypes() {
		got, ok := NEMAMinimumIP(ty)
		w, has := want[ty]
		if !has {
			if ok || !ty.Hazardous() {
				t.Errorf("NEMAMinimumIP(%s) = %v, %v; want no entry for a hazardous-location Type", ty, got, ok)
			}
			continue
		}
		if !ok || got.String() != w {
			t.Errorf("NEMAMinimumIP(%s) = %v, %v; want %s", ty, got, ok, w)
		}
	}
}

// TestNEMAProfileMeetsItsIP: whatever a Type's minimum IP code shows, the
// Type shows too (the conversion runs one way: Type implies IP).
func TestNEMAProfileMeetsItsIP(t *testing.T) {
	for _, ty := range NEMATypes() {
		ip, ok := NEMAMinimumIP(ty)
		if !ok {
			continue
		}
		pt := protectionOf(Enclosure{NEMA: ty})
		pi := protectionOf(Enclosure{IP: IPRating{ip}})
		for _, w := range pi.water {
			if !slices.Contains(pt.water, w) {
				t.Errorf("Type %s does not show %s although %s does", ty, w, ip)
			}
		}
		if pt.dust < pi.dust {
			t.Errorf("Type %s shows dust level %d below %s's %d", ty, pt.dust, ip, pi.dust)
		}
	}
}

// TestClassifyCorrosion holds the ANSI/ISA-71.04-2013 limits (published):
// copper reactivity per 30 days G1 < 300 Å, G2 < 1000 Å, G3 < 2000 Å,
// GX >= 2000 Å; silver G1 < 200 Å, then the same.
func TestClassifyCorrosion(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		cu, ag float64
		want   Corrosion
		bad    bool
	}{
		{cu: 0, ag: nan, want: CorrosionG1},
		{cu: 299.9, ag: nan, want: CorrosionG1},
		{cu: 300, ag: nan, want: CorrosionG2},
		{cu: 999.9, ag: nan, want: CorrosionG2},
		{cu: 1000, ag: nan, want: CorrosionG3},
		{cu: 1999.9, ag: nan, want: CorrosionG3},
		{cu: 2000, ag: nan, want: CorrosionGX},
		{cu: 5000, ag: nan, want: CorrosionGX},
		{cu: nan, ag: 199.9, want: CorrosionG1},
		{cu: nan, ag: 200, want: CorrosionG2},
		{cu: nan, ag: 999.9, want: CorrosionG2},
		{cu: nan, ag: 1000, want: CorrosionG3},
		{cu: nan, ag: 2000, want: CorrosionGX},
		// The worse metal sets the level.
		{cu: 250, ag: 250, want: CorrosionG2},
		{cu: 1500, ag: 150, want: CorrosionG3},
		{cu: 100, ag: 2100, want: CorrosionGX},
		{cu: nan, ag: nan, bad: true},
		{cu: -1, ag: nan, bad: true},
		{cu: 100, ag: math.Inf(1), bad: true},
	}
	for _, tc := range tests {
		got, err := ClassifyCorrosion(tc.cu, tc.ag)
		if tc.bad {
			if err == nil {
				t.Errorf("ClassifyCorrosion(%v, %v) = %v, want an error", tc.cu, tc.ag, got)
			}
			continue
		}
		if err != nil || got != tc.want {
			t.Errorf("ClassifyCorrosion(%v, %v) = %v, %v; want %v", tc.cu, tc.ag, got, err, tc.want)
		}
	}
}

func TestReactivityPer30Days(t *testing.T) {
	// Arithmetic: 450 Å over 45 days is 300 Å per 30 days (the G1/G2 copper
	// limit of ISA-71.04, so the area is G2).
	got, err := ReactivityPer30Days(450, 45)
	if err != nil || got != 300 {
		t.Fatalf("ReactivityPer30Days(450, 45) = %v, %v; want 300", got, err)
	}
	if l, _ := ClassifyCorrosion(got, math.NaN()); l != CorrosionG2 {
		t.Errorf("300 Å copper classified %v, want G2", l)
	}
	for _, bad := range [][2]float64{{100, 0}, {100, -3}, {-1, 30}, {math.NaN(), 30}, {100, math.NaN()}} {
		if _, err := ReactivityPer30Days(bad[0], bad[1]); err == nil {
			t.Errorf("ReactivityPer30Days(%v, %v) gave no error", bad[0], bad[1])
		}
	}
}

// TestJudgeEnclosureCases holds the cases the design brief names and the
// IEC 60529 implication rules.
func TestJudgeEnclosureCases(t *testing.T) {
	type want struct {
		rule string
		v    Verdict
		sev  Severity
	}
	tests := []struct {
		name      string
		nema, ip  string
		mount     Mounting
		coated    bool
		env       func(*Environment)
		want      []want
		msgSubstr string
	}{
		{name: "Type 1 at an outdoor intake is critical", nema: "1",
			env:  func(e *Environment) { e.Location = Outdoor; e.Sun = SunFull; e.Water = WaterDripping },
			want: []want{{"enclosure.outdoor", VerdictFinding, SeverityCritical}, {"enclosure.water", VerdictFinding, SeverityMajor}, {"enclosure.sun", VerdictVerify, SeverityAdvice}}},
		{name: "Type 13 outdoors is critical too", nema: "13",
			env:  func(e *Environment) { e.Location = Outdoor },
			want: []want{{"enclosure.outdoor", VerdictFinding, SeverityCritical}}},
		{name: "Type 2 under dripping water passes", nema: "2",
			env:  func(e *Environment) { e.Water = WaterDripping },
			want: []want{{"enclosure.water", VerdictPass, ""}}},
		{name: "open-chassis IP20 in a hose-down hall is critical", ip: "IP20",
			env:  func(e *Environment) { e.Water = WaterHoseDown; e.Condensation = true },
			want: []want{{"enclosure.water", VerdictFinding, SeverityCritical}, {"enclosure.condensation", VerdictVerify, SeverityAdvice}}},
		{name: "IP20 under dripping water is at least major", ip: "IP20",
			env:  func(e *Environment) { e.Water = WaterDripping },
			want: []want{{"enclosure.water", VerdictFinding, SeverityMajor}}},
		{name: "IP67 alone does not show jets", ip: "IP67",
			env:       func(e *Environment) { e.Water = WaterHoseDown },
			want:      []want{{"enclosure.water", VerdictFinding, SeverityMajor}},
			msgSubstr: "dual-coded"},
		{name: "IP66/IP67 shows jets and immersion", ip: "IP66/IP67",
			env:  func(e *Environment) { e.Water = WaterHoseDown },
			want: []want{{"enclosure.water", VerdictPass, ""}}},
		{name: "IP66/IP67 shows temporary submersion", ip: "IP66/IP67",
			env:  func(e *Environment) { e.Water = WaterTemporarySubmersion },
			want: []want{{"enclosure.water", VerdictPass, ""}}},
		{name: "IP69K alone shows hot washdown", ip: "IP69K",
			env:  func(e *Environment) { e.Water = WaterHotWashdown },
			want: []want{{"enclosure.water", VerdictPass, ""}}},
		{name: "IP66 does not show hot washdown", ip: "IP66",
			env:  func(e *Environment) { e.Water = WaterHotWashdown },
			want: []want{{"enclosure.water", VerdictFinding, SeverityMinor}}},
		{name: "IP66 in an oily area must be verified, never passed", ip: "IP66",
			env:  func(e *Environment) { e.Oil = OilSeepage },
			want: []want{{"enclosure.oil", VerdictVerify, SeverityAdvice}}},
		{name: "IP66 in salt air must be verified", ip: "IP66",
			env:  func(e *Environment) { e.SaltAir = true },
			want: []want{{"enclosure.corrosion", VerdictVerify, SeverityAdvice}}},
		{name: "Type 4X in salt air passes", nema: "4X", coated: true,
			env:  func(e *Environment) { e.SaltAir = true; e.Location = Outdoor },
			want: []want{{"enclosure.corrosion", VerdictPass, ""}, {"enclosure.outdoor", VerdictPass, ""}}},
		{name: "Type 4 in salt air is a corrosion finding", nema: "4",
			env:  func(e *Environment) { e.SaltAir = true },
			want: []want{{"enclosure.corrosion", VerdictFinding, SeverityMinor}}},
		{name: "Type 12 in a G3 room", nema: "12",
			env:  func(e *Environment) { e.Corrosion = CorrosionG3 },
			want: []want{{"enclosure.corrosion", VerdictFinding, SeverityMajor}, {"environment.board_corrosion", VerdictFinding, SeverityMajor}}},
		{name: "uncoated boards at G2 are minor", nema: "4X",
			env:  func(e *Environment) { e.Corrosion = CorrosionG2 },
			want: []want{{"environment.board_corrosion", VerdictFinding, SeverityMinor}}},
		{name: "uncoated boards at GX are critical", nema: "4X",
			env:  func(e *Environment) { e.Corrosion = CorrosionGX },
			want: []want{{"environment.board_corrosion", VerdictFinding, SeverityCritical}}},
		{name: "coated boards pass at G3", nema: "4X", coated: true,
			env:  func(e *Environment) { e.Corrosion = CorrosionG3 },
			want: []want{{"environment.board_corrosion", VerdictPass, ""}}},
		{name: "coated boards at GX need specialist advice", nema: "4X", coated: true,
			env:       func(e *Environment) { e.Corrosion = CorrosionGX },
			want:      []want{{"environment.board_corrosion", VerdictVerify, SeverityAdvice}},
			msgSubstr: "sealed or purged"},
		{name: "drive in a Type 12 cabinet in a G3 room: cabinet for ingress, boards by coating", nema: "12", mount: MountingCabinet,
			env:       func(e *Environment) { e.Corrosion = CorrosionG3; e.Dust = DustFibres },
			want:      []want{{"enclosure.dust", VerdictPass, ""}, {"environment.board_corrosion", VerdictFinding, SeverityMajor}},
			msgSubstr: "cabinet"},
		{name: "conductive dust needs dust-tight", nema: "4X",
			env:  func(e *Environment) { e.Dust = DustConductive },
			want: []want{{"enclosure.dust", VerdictFinding, SeverityMajor}}},
		{name: "conductive dust with IP65 passes", ip: "IP65",
			env:  func(e *Environment) { e.Dust = DustConductive },
			want: []want{{"enclosure.dust", VerdictPass, ""}}},
		{name: "windblown dust into a Type 3R", nema: "3R",
			env:  func(e *Environment) { e.Location = Outdoor; e.Dust = DustWindblown },
			want: []want{{"enclosure.dust", VerdictFinding, SeverityMajor}, {"enclosure.outdoor", VerdictPass, ""}}},
		{name: "oil spray needs Type 13", nema: "12",
			env:  func(e *Environment) { e.Oil = OilSpray },
			want: []want{{"enclosure.oil", VerdictFinding, SeverityMinor}}},
		{name: "oil spray on a Type 4", nema: "4",
			env:  func(e *Environment) { e.Oil = OilSpray },
			want: []want{{"enclosure.oil", VerdictFinding, SeverityMajor}}},
		{name: "Type 12 with IP65 outdoors keeps rain out but is indoor-only", nema: "12", ip: "IP65",
			env:  func(e *Environment) { e.Location = Outdoor },
			want: []want{{"enclosure.outdoor", VerdictFinding, SeverityMajor}}},
		{name: "IP65 outdoors in frost and sun is verify three times", ip: "IP65",
			env: func(e *Environment) { e.Location = Outdoor; e.AmbientMinC = -15; e.Sun = SunFull },
			want: []want{{"enclosure.outdoor", VerdictVerify, SeverityAdvice}, {"enclosure.ice", VerdictVerify, SeverityAdvice},
				{"enclosure.sun", VerdictVerify, SeverityAdvice}}},
		{name: "Type 4X outdoors in frost and sun passes", nema: "4X",
			env: func(e *Environment) { e.Location = Outdoor; e.AmbientMinC = -15; e.Sun = SunFull },
			want: []want{{"enclosure.outdoor", VerdictPass, ""}, {"enclosure.ice", VerdictPass, ""},
				{"enclosure.sun", VerdictPass, ""}}},
		{name: "hazardous-location Type in an ordinary wet area is verify", nema: "7",
			env:  func(e *Environment) { e.Water = WaterSplashing },
			want: []want{{"enclosure.water", VerdictVerify, SeverityAdvice}}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			env := baseEnv()
			tc.env(&env)
			if bad := env.Validate(); len(bad) > 0 {
				t.Fatalf("test environment invalid: %v", bad)
			}
			mount := tc.mount
			if mount == "" {
				mount = MountingOwn
			}
			r := JudgeEnclosure(env, Housing{Enclosure: mustEnclosure(t, tc.nema, tc.ip), Mounting: mount, BoardsCoated: tc.coated})
			var msgs []string
			for _, w := range tc.want {
				c := checkOf(t, r, w.rule)
				if c.Verdict != w.v || c.Severity != w.sev {
					t.Errorf("%s: %s(%s), want %s(%s): %s", w.rule, c.Verdict, c.Severity, w.v, w.sev, c.Message)
				}
				msgs = append(msgs, c.Message)
			}
			if tc.msgSubstr != "" && !strings.Contains(strings.Join(msgs, " ")+r.Note, tc.msgSubstr) {
				t.Errorf("messages %q lack %q", msgs, tc.msgSubstr)
			}
		})
	}
}

func TestJudgeEnclosureHazardousIsOutsideJudgement(t *testing.T) {
	env := baseEnv()
	env.HazardousClass = true
	env.Water = WaterHoseDown
	for _, e := range []Enclosure{{NEMA: "1"}, {NEMA: "7"}, {IP: IPRating{{Solids: 6, Water: 6}}}} {
		r := JudgeEnclosure(env, Housing{Enclosure: e, Mounting: MountingOwn})
		if !r.OutsideJudgement || len(r.Checks) != 1 || r.Checks[0].Rule != "environment.hazardous_location" ||
			r.Checks[0].Verdict != VerdictOutside {
			t.Errorf("%v in a hazardous area: %+v", e, r)
		}
		if len(r.Findings) != 1 || r.Findings[0].Severity != SeverityAdvice || r.Findings[0].Kind != KindEnvironment {
			t.Errorf("%v in a hazardous area: findings %+v", e, r.Findings)
		}
	}
}

// TestJudgeEnclosureReportShape: every check's rule is catalogued with the
// right kind; findings mirror the non-pass checks (verify and outside as
// advice); a pass carries no severity.
func TestJudgeEnclosureReportShape(t *testing.T) {
	raised := map[string]bool{}
	for _, row := range matrixRows(t) {
		for _, env := range allSingleValueEnvs() {
			for _, coated := range []bool{false, true} {
				r := JudgeEnclosure(env.env, Housing{Enclosure: row.enc, Mounting: MountingOwn, BoardsCoated: coated})
				nonPass := 0
				for _, c := range r.Checks {
					info := enclosureRule(c.Rule)
					if info.Kind == "" || info.Kind != c.Kind {
						t.Fatalf("rule %s not catalogued or wrong kind %q", c.Rule, c.Kind)
					}
					if c.Message == "" || c.Need == "" || c.RatingShows == "" || c.Remedy == "" || len(c.Evidence) == 0 {
						t.Fatalf("%s %s %s: incomplete check %+v", row.label, env.label, c.Rule, c)
					}
					switch c.Verdict {
					case VerdictPass:
						if c.Severity != "" {
							t.Fatalf("pass with severity: %+v", c)
						}
					case VerdictVerify, VerdictOutside:
						if c.Severity != SeverityAdvice {
							t.Fatalf("verify/outside not advice: %+v", c)
						}
						if c.Verdict == VerdictVerify && !strings.HasPrefix(c.Message, "Not shown by the rating: verify.") {
							t.Fatalf("verify message does not say so: %q", c.Message)
						}
					case VerdictFinding:
						if !c.Severity.Valid() || c.Severity == SeverityAdvice {
							t.Fatalf("finding with severity %q: %+v", c.Severity, c)
						}
					default:
						t.Fatalf("unknown verdict %q", c.Verdict)
					}
					if c.Verdict != VerdictPass {
						nonPass++
						raised[c.Rule] = true
					}
				}
				if len(r.Findings) != nonPass {
					t.Fatalf("%d findings for %d non-pass checks", len(r.Findings), nonPass)
				}
			}
		}
	}
	for _, info := range enclosureRules {
		if !raised[info.ID] {
			t.Errorf("rule %s is catalogued but never raised by the matrix", info.ID)
		}
		if info.Title == "" || info.Remedy == "" || !info.Kind.Valid() {
			t.Errorf("incomplete rule info %+v", info)
		}
	}
}

// TestIPImplicationRules checks IEC 60529's implication rules directly:
// second digits up to 6 imply every lower digit; 7, 8 and 9 do not imply 5
// or 6 unless dual-coded.
func TestIPImplicationRules(t *testing.T) {
	shows := func(ip string, w Water) bool {
		r, err := ParseIPRating(ip)
		if err != nil {
			t.Fatal(err)
		}
		return slices.Contains(protectionOf(Enclosure{IP: r}).water, w)
	}
	for d := 1; d <= 6; d++ {
		ip := fmt.Sprintf("IPX%d", d)
		if !shows(ip, WaterDripping) {
			t.Errorf("%s should show dripping", ip)
		}
		if (d >= 4) != shows(ip, WaterSplashing) {
			t.Errorf("%s splashing wrong", ip)
		}
		if (d >= 5) != shows(ip, WaterHoseDown) {
			t.Errorf("%s jets wrong", ip)
		}
	}
	for _, ip := range []string{"IPX7", "IPX8", "IPX9", "IPX9K", "IP69K"} {
		if shows(ip, WaterHoseDown) {
			t.Errorf("%s alone must not show jets (IEC 60529)", ip)
		}
	}
	if shows("IPX9K", WaterTemporarySubmersion) || shows("IPX7", WaterHotWashdown) {
		t.Error("immersion and hot washdown must not imply each other")
	}
	for _, ip := range []string{"IP66/IP67", "IP65/IP68", "IP66/IP69K"} {
		if !shows(ip, WaterHoseDown) {
			t.Errorf("dual-coded %s should show jets", ip)
		}
	}
}

type matrixRow struct {
	label string
	enc   Enclosure
}

func matrixRows(t testing.TB) []matrixRow {
	var rows []matrixRow
	for _, ty := range NEMATypes() {
		rows = append(rows, matrixRow{"Type " + string(ty), Enclosure{NEMA: ty}})
	}
	for _, ip := range []string{"IP20", "IP21", "IP23", "IP54", "IP55", "IP65", "IP66", "IP67", "IPX9K", "IP69K", "IP66/IP67"} {
		rows = append(rows, matrixRow{ip, mustEnclosure(t, "", ip)})
	}
	return rows
}

type envCase struct {
	label string
	env   Environment
}

// matrixTable is one table of the golden matrix: the environments that vary
// one field, and the rules whose verdicts the table shows.
type matrixTable struct {
	title  string
	rules  []string
	also   []string // other rules these environments may move, not shown
	coated bool
	envs   []envCase
}

func with(label string, f func(*Environment)) envCase {
	e := baseEnv()
	f(&e)
	return envCase{label, e}
}

func matrixTables() []matrixTable {
	var water, dust, oil, corr []envCase
	for _, w := range Waters() {
		water = append(water, with(string(w), func(e *Environment) { e.Water = w }))
	}
	for _, d := range Dusts() {
		dust = append(dust, with(string(d), func(e *Environment) { e.Dust = d }))
	}
	for _, o := range Oils() {
		oil = append(oil, with(string(o), func(e *Environment) { e.Oil = o }))
	}
	for _, c := range Corrosions() {
		corr = append(corr, with(string(c), func(e *Environment) { e.Corrosion = c }))
	}
	corr = append(corr, with("salt_air", func(e *Environment) { e.SaltAir = true }))
	return []matrixTable{
		{title: "Location, frost and sun (enclosure.outdoor, enclosure.ice, enclosure.sun)",
			rules: []string{"enclosure.outdoor", "enclosure.ice", "enclosure.sun"}, coated: true,
			envs: []envCase{
				with("indoor", func(*Environment) {}),
				with("outdoor", func(e *Environment) { e.Location = Outdoor }),
				with("outdoor_frost", func(e *Environment) { e.Location = Outdoor; e.AmbientMinC = -10 }),
				with("sun_partial", func(e *Environment) { e.Sun = SunPartial }),
				with("sun_full", func(e *Environment) { e.Sun = SunFull }),
			}},
		{title: "Water (enclosure.water)", rules: []string{"enclosure.water"}, coated: true, envs: water},
		{title: "Dust (enclosure.dust)", rules: []string{"enclosure.dust"}, coated: true, envs: dust},
		{title: "Oil (enclosure.oil)", rules: []string{"enclosure.oil"}, coated: true, envs: oil},
		{title: "Corrosion of the enclosure (enclosure.corrosion; boards coated)", rules: []string{"enclosure.corrosion"},
			also: []string{"environment.board_corrosion"}, coated: true, envs: corr},
		{title: "Boards (environment.board_corrosion) with uncoated boards", rules: []string{"environment.board_corrosion"},
			also: []string{"enclosure.corrosion"}, coated: false, envs: corr},
		{title: "Condensation and hazardous areas (enclosure.condensation, environment.hazardous_location)",
			rules: []string{"enclosure.condensation", "environment.hazardous_location"}, coated: true,
			envs: []envCase{
				with("condensation", func(e *Environment) { e.Condensation = true }),
				with("hazardous", func(e *Environment) { e.HazardousClass = true }),
			}},
	}
}

func allSingleValueEnvs() []envCase {
	var out []envCase
	for _, tb := range matrixTables() {
		out = append(out, tb.envs...)
	}
	return out
}

func cellText(c EnclosureCheck) string {
	switch c.Verdict {
	case VerdictFinding:
		return "finding(" + string(c.Severity) + ")"
	case VerdictOutside:
		return "outside"
	}
	return string(c.Verdict)
}

// TestEnclosureMatrix writes every NEMA Type and a set of IP codes against
// every single environment value to testdata/enclosure_matrix.golden.
// Regenerate with: go test ./health -run Matrix -update
func TestEnclosureMatrix(t *testing.T) {
	var buf bytes.Buffer
	buf.WriteString("# Enclosure against environment: one cell per (enclosure, single environment value).\n")
	buf.WriteString("# Baseline area: indoor, no sun, 5..35 °C, no water, dust or oil, ISA-71.04 G1, no salt, no condensation.\n")
	buf.WriteString("# Each column changes one field. A cell lists the non-pass verdicts of the table's rules, or pass.\n")
	buf.WriteString("# Regenerate: go test ./health -run Matrix -update\n")
	rows := matrixRows(t)
	for _, tb := range matrixTables() {
		fmt.Fprintf(&buf, "\n## %s\n\n", tb.title)
		cells := make([][]string, len(rows))
		widths := make([]int, len(tb.envs)+1)
		widths[0] = len("enclosure")
		for i, row := range rows {
			widths[0] = max(widths[0], len(row.label))
			for _, env := range tb.envs {
				r := JudgeEnclosure(env.env, Housing{Enclosure: row.enc, Mounting: MountingOwn, BoardsCoated: tb.coated})
				var parts []string
				for _, c := range r.Checks {
					if c.Verdict == VerdictPass {
						continue
					}
					if slices.Contains(tb.also, c.Rule) {
						continue
					}
					if !slices.Contains(tb.rules, c.Rule) {
						// Single-value environments must only move the
						// table's own rules.
						t.Errorf("%s in %s: %s %s leaks into the %q table", row.label, env.label, c.Rule, cellText(c), tb.title)
						continue
					}
					parts = append(parts, cellText(c))
				}
				cell := "pass"
				if len(parts) > 0 {
					cell = strings.Join(parts, "+")
				}
				cells[i] = append(cells[i], cell)
			}
		}
		for j, env := range tb.envs {
			widths[j+1] = len(env.label)
			for i := range rows {
				widths[j+1] = max(widths[j+1], len(cells[i][j]))
			}
		}
		line := func(first string, rest []string) {
			fmt.Fprintf(&buf, "%-*s", widths[0], first)
			for j, s := range rest {
				fmt.Fprintf(&buf, " | %-*s", widths[j+1], s)
			}
			buf.WriteString("\n")
		}
		var head, rule []string
		for j, env := range tb.envs {
			head = append(head, env.label)
			rule = append(rule, strings.Repeat("-", widths[j+1]))
		}
		line("enclosure", head)
		line(strings.Repeat("-", widths[0]), rule)
		for i, row := range rows {
			line(row.label, cells[i])
		}
	}
	got := bytes.ReplaceAll(buf.Bytes(), []byte(" \n"), []byte("\n"))
	for bytes.Contains(got, []byte(" \n")) {
		got = bytes.ReplaceAll(got, []byte(" \n"), []byte("\n"))
	}
	path := filepath.Join("testdata", "enclosure_matrix.golden")
	if goldenUpdate() {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("read golden (run with -update to create it): %v", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("enclosure matrix differs from %s; rerun with -update and review the diff.\n%s", path, firstDiff(string(want), string(got)))
	}
}

// firstDiff shows the first differing line of two texts.
func firstDiff(want, got string) string {
	w, g := strings.Split(want, "\n"), strings.Split(got, "\n")
	for i := 0; i < max(len(w), len(g)); i++ {
		var a, b string
		if i < len(w) {
			a = w[i]
		}
		if i < len(g) {
			b = g[i]
		}
		if a != b {
			return fmt.Sprintf("line %d:\nwant %q\ngot  %q", i+1, a, b)
		}
	}
	return "no line differs"
}
