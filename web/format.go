package web

import (
	"fmt"
	"html/template"
	"math"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/web/chart"
)

// funcs are the template functions: formatting only, no store access.
func funcs() template.FuncMap {
	return template.FuncMap{
		"pct":        percent,
		"pctp":       percentP,
		"num":        func(v float64, dec int) string { return trimNum(v, dec) },
		"nump":       numP,
		"date":       date,
		"datep":      dateP,
		"datetime":   datetime,
		"words":      words,
		"bandLabel":  bandLabel,
		"bandNote":   bandNote,
		"sevLabel":   func(s health.Severity) string { return strings.ToUpper(string(s)[:1]) + string(s)[1:] },
		"statusWord": func(s store.FindingStatus) string { return words(string(s)) },
		"verdict":    verdictLabel,
		"yesno":      yesNo,
		"deref":      func(p *int64) int64 { return *p },
		"add":        func(a, b int) int { return a + b },
		"days":       func(d time.Duration) int { return int(d / (24 * time.Hour)) },
		"isFinite":   func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) },
		"hours":      hours,
		"hoursp":     hoursP,
		"args":       args,
		"money":      money,
		"month":      monthLabel,
		"monthOf":    func(t time.Time) string { return t.UTC().Format("Jan 2006") },
		"prio":       priorityWord,
		"modeLabel":  modeLabel,
		"action":     func(a store.WorkAction) string { return actionLabel(a) },
		"hoursShort": hoursShort,
		"groupNote":  groupNote,
		"marker":     chart.MarkerPath,
		"overdue":    func(t time.Time, now time.Time) bool { return t.Before(now) },
	}
}

// percent writes a fraction (1 = 100 %) as a percentage.
func percent(f float64) string {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return "–"
	}
	dec := 0
	if math.Abs(f) < 0.1 && f != 0 {
		dec = 1
	}
	return trimNum(f*100, dec) + "\u00a0%" // no break between number and sign
}

func percentP(f *float64) string {
	if f == nil {
		return "–"
	}
	return percent(*f)
}

func numP(v *float64, dec int) string {
	if v == nil || math.IsNaN(*v) {
		return "–"
	}
	return trimNum(*v, dec)
}

// hours writes a number of hours, with years beside large ones.
func hours(h float64) string {
	if math.IsNaN(h) || math.IsInf(h, 0) || h < 0 {
		return "–"
	}
	s := grouped(math.Round(h)) + " h"
	if h >= 24*365 {
		s += " (" + trimNum(h/(24*365.25), 1) + " years)"
	}
	return s
}

func hoursP(h *float64) string {
	if h == nil {
		return "–"
	}
	return hours(*h)
}

// date writes a day in an unambiguous form.
func date(t time.Time) string {
	if t.IsZero() {
		return "–"
	}
	return t.UTC().Format("2 Jan 2006")
}

func dateP(t *time.Time) string {
	if t == nil {
		return "–"
	}
	return date(*t)
}

func datetime(t time.Time) string {
	if t.IsZero() {
		return "–"
	}
	return t.UTC().Format("2 Jan 2006 15:04 UTC")
}

// words turns an enumeration value into words: "hose_down" → "hose down".
func words(s string) string { return strings.ReplaceAll(s, "_", " ") }

// bandLabel names a health band for people.
func bandLabel(b health.Band) string {
	switch b {
	case health.BandSound:
		return "Sound"
	case health.BandWatch:
		return "Watch"
	case health.BandPlan:
		return "Plan"
	case health.BandUrgent:
		return "Urgent"
	}
	return "Not assessed"
}

// bandNote says what a band asks of the reader.
func bandNote(b health.Band) string {
	switch b {
	case health.BandSound:
		return "nothing to do beyond routine care"
	case health.BandWatch:
		return "keep an eye on it"
	case health.BandPlan:
		return "plan work at the next opportunity"
	case health.BandUrgent:
		return "act now"
	}
	return ""
}

// verdictLabel names an enclosure verdict for people.
func verdictLabel(v health.Verdict) string {
	switch v {
	case health.VerdictPass:
		return "Suits the area"
	case health.VerdictFinding:
		return "Falls short"
	case health.VerdictVerify:
		return "Check on site"
	case health.VerdictOutside:
		return "Outside kelvard's judgement"
	}
	return words(string(v))
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

// args gathers name, value pairs into a map, so a template can hand
// several values to another.
func args(kv ...any) (map[string]any, error) {
	if len(kv)%2 != 0 {
		return nil, fmt.Errorf("args: odd number of arguments")
	}
	m := make(map[string]any, len(kv)/2)
	for i := 0; i < len(kv); i += 2 {
		k, ok := kv[i].(string)
		if !ok {
			return nil, fmt.Errorf("args: key %v is not a string", kv[i])
		}
		m[k] = kv[i+1]
	}
	return m, nil
}

// grouped writes a whole number with thin spaces between groups of three
// digits (ISO 80000-1 style), so long hour counts read at a glance.
func grouped(v float64) string {
	s := strconv.FormatFloat(math.Abs(v), 'f', 0, 64)
	var b strings.Builder
	if v < 0 {
		b.WriteString("-")
	}
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteString("\u202f")
		}
		b.WriteRune(c)
	}
	return b.String()
}
