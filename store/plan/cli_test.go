package plan

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"flag"
	"io"
	"strings"
	"testing"

	"kelvard/health"
	"kelvard/store"
)

// parseOpts parses the command's flags as main does.
func parseOpts(t *testing.T, args ...string) (string, *CommandOptions) {
	t.Helper()
	fs := flag.NewFlagSet("plan", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	o := AddFlags(fs)
	view, rest := SplitView(args)
	if err := fs.Parse(rest); err != nil {
		t.Fatal(err)
	}
	return view, o
}

// TestCommandViews runs `kelvard plan` over the hot drives in each view
// and format.
func TestCommandViews(t *testing.T) {
	t.Parallel()
	h := newHotRig(t, store.SQLite)
	h.refresh()
	run := func(args ...string) string {
		t.Helper()
		view, o := parseOpts(t, args...)
		var buf bytes.Buffer
		if err := Command(h.ctx, h.st, view, o, &buf); err != nil {
			t.Fatalf("plan %v: %v", args, err)
		}
		return buf.String()
	}
	all := run()
	for _, want := range []string{"Replacement forecast: 24 months", "MONTH", "total", "Fleet reliability", "DIMENSION",
		"Spare drives", "Backtest", "Work orders: 4", "replace_capacitors", "Caution: " + health.SafetyCaution} {
		if !strings.Contains(all, want) {
			t.Errorf("bare plan lacks %q:\n%s", want, all)
		}
	}
	recs, err := csv.NewReader(strings.NewReader(run("forecast", "--format", "csv"))).ReadAll()
	if err != nil || len(recs) < 2 || strings.Join(recs[0], ",") != strings.Join(ForecastItemColumns, ",") {
		t.Errorf("forecast CSV %v %v", recs, err)
	}
	if b := run("forecast", "--format", "csv", "--table", "budget", "--horizon-months", "6"); strings.Count(b, "\n") != 1+6+1+countBudget(h) {
		t.Errorf("budget CSV:\n%s", b)
	}
	var rel Reliability
	if err := json.Unmarshal([]byte(run("reliability", "--format", "json")), &rel); err != nil || len(rel.Groups) == 0 || len(rel.Spares) != 1 {
		t.Errorf("reliability JSON: %v %+v", err, rel.Spares)
	}
	if s := run("reliability", "--format", "csv", "--table", "spares"); !strings.HasPrefix(s, "model,lead_time_days") || strings.Count(s, "\n") != 3 {
		t.Errorf("spares CSV:\n%s", s)
	}
	if s := run("work-orders", "--format", "csv"); !strings.HasPrefix(s, "work_order_id,") || !strings.Contains(s, health.SafetyCaution) {
		t.Errorf("work orders CSV:\n%s", s)
	}
	var wo struct {
		Items   []store.WorkOrder `json:"items"`
		Caution string            `json:"caution"`
	}
	if err := json.Unmarshal([]byte(run("work-orders", "--format", "json", "--status", "proposed")), &wo); err != nil || len(wo.Items) != 4 || wo.Caution == "" {
		t.Errorf("work orders JSON: %v, %d items", err, len(wo.Items))
	}
	for _, bad := range [][]string{{"budget"}, {"--format", "csv"}, {"forecast", "--format", "xml"}, {"forecast", "--table", "spares"},
		{"work-orders", "--status", "late"}, {"forecast", "--horizon-months", "0"}, {"forecast", "--refurbish-share", "1.5"}} {
		view, o := parseOpts(t, bad...)
		if err := o.Check(view); err == nil {
			t.Errorf("plan %v accepted", bad)
		}
	}
}

// countBudget counts the budget rows (month and site) of a 6-month
// forecast over the rig.
func countBudget(h *hotRig) int {
	f, err := ForecastFor(h.ctx, h.st, Config{HorizonMonths: 6})
	h.must(err)
	return len(f.Budget)
}
