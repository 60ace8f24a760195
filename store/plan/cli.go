package plan

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// Views of `kelvard plan`.
const (
	ViewAll         = ""
	ViewForecast    = "forecast"
	ViewReliability = "reliability"
	ViewWorkOrders  = "work-orders"
)

// CommandOptions are the flags of `kelvard plan`.
type CommandOptions struct {
	Format         string
	Table          string
	HorizonMonths  int
	RefurbishShare float64
	Status         string
}

// AddFlags registers the command's flags on fs.
func AddFlags(fs *flag.FlagSet) *CommandOptions {
	o := &CommandOptions{}
	fs.StringVar(&o.Format, "format", "table", "table, csv or json")
	fs.StringVar(&o.Table, "table", "", "with --format csv: forecast items|budget, reliability groups|spares|backtest (default the first)")
	fs.IntVar(&o.HorizonMonths, "horizon-months", 24, "forecast horizon in months")
	fs.Float64Var(&o.RefurbishShare, "refurbish-share", 0.5,
		"replace capacitors in the drive while a kit costs less than this share of a new drive (common practice: half)")
	fs.StringVar(&o.Status, "status", "open", "work orders to list: open, or one of proposed, approved, scheduled, done, cancelled, withdrawn")
	return o
}

// SplitView takes the view named before the flags, if any: `kelvard plan
// forecast --format csv`.
func SplitView(args []string) (string, []string) {
	if len(args) > 0 && !strings.HasPrefix(args[0], "-") {
		return args[0], args[1:]
	}
	return ViewAll, args
}

// Check reports a view or flag the command cannot take.
func (o *CommandOptions) Check(view string) error {
	switch view {
	case ViewAll, ViewForecast, ViewReliability, ViewWorkOrders:
	default:
		return fmt.Errorf("unknown view %q: want forecast, reliability or work-orders", view)
	}
	switch o.Format {
	case "table", "csv", "json":
	default:
		return fmt.Errorf("--format %q: want table, csv or json", o.Format)
	}
	if view == ViewAll && o.Format != "table" {
		return fmt.Errorf("--format %s needs one view: forecast, reliability or work-orders", o.Format)
	}
	tables := map[string][]string{ViewForecast: {"", "items", "budget"}, ViewReliability: {"", "groups", "spares", "backtest"}}
	if o.Table != "" && !contains(tables[view], o.Table) {
		return fmt.Errorf("--table %q does not apply to %q", o.Table, view)
	}
	if o.Status != "open" && !validStatus(store.WorkOrderStatus(o.Status)) {
		return fmt.Errorf("--status %q: want open or one of %v", o.Status, store.WorkOrderStatuses())
	}
	if o.HorizonMonths < 1 || o.HorizonMonths > 120 {
		return fmt.Errorf("--horizon-months %d: want 1 to 120", o.HorizonMonths)
	}
	if !(o.RefurbishShare > 0 && o.RefurbishShare <= 1) {
		return fmt.Errorf("--refurbish-share %v: want a share in (0, 1]", o.RefurbishShare)
	}
	return nil
}

func contains(vs []string, v string) bool {
	for _, x := range vs {
		if x == v {
			return true
		}
	}
	return false
}

// Command prints a view of the plan: the forecast, the reliability summary
// with spares, or the work orders, as a table, CSV or JSON; the bare
// command prints all three as tables.
func Command(ctx context.Context, st *store.Store, view string, o *CommandOptions, w io.Writer) error {
	if err := o.Check(view); err != nil {
		return err
	}
	cfg := Config{HorizonMonths: o.HorizonMonths, RefurbishShare: o.RefurbishShare}
	if view == ViewAll || view == ViewForecast {
		f, err := ForecastFor(ctx, st, cfg)
		if err != nil {
			return err
		}
		switch {
		case o.Format == "json":
			return writeJSON(w, f)
		case o.Format == "csv" && o.Table == "budget":
			return WriteBudgetCSV(w, f)
		case o.Format == "csv":
			return WriteForecastCSV(w, f)
		}
		if err := ForecastTable(w, f); err != nil {
			return err
		}
	}
	if view == ViewAll || view == ViewReliability {
		r, err := ReliabilityFor(ctx, st, cfg)
		if err != nil {
			return err
		}
		switch {
		case o.Format == "json":
			return writeJSON(w, r)
		case o.Format == "csv" && o.Table == "spares":
			return WriteSparesCSV(w, r)
		case o.Format == "csv" && o.Table == "backtest":
			return WriteBacktestCSV(w, r)
		case o.Format == "csv":
			return WriteGroupsCSV(w, r)
		}
		if view == ViewAll {
			fmt.Fprintln(w)
		}
		if err := ReliabilityTable(w, r); err != nil {
			return err
		}
	}
	if view == ViewAll || view == ViewWorkOrders {
		orders, err := st.AllWorkOrders(ctx, map[string]string{"status": o.Status})
		if err != nil {
			return err
		}
		switch o.Format {
		case "json":
			return writeJSON(w, map[string]any{"items": orders, "caution": health.SafetyCaution})
		case "csv":
			return WriteWorkOrdersCSV(w, orders)
		}
		if view == ViewAll {
			fmt.Fprintln(w)
		}
		return WorkOrdersTable(w, orders)
	}
	return nil
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

func money(v float64) string { return strconv.FormatFloat(v, 'f', 2, 64) }

func hours(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

func day(t *time.Time) string {
	if t == nil {
		return "open"
	}
	return t.Format(time.DateOnly)
}

// ForecastTable prints the budget by month, the totals and the items.
func ForecastTable(w io.Writer, f Forecast) error {
	fmt.Fprintf(w, "Replacement forecast: %d months from %s to %s; capacitors replaced in the drive while a kit costs less than %.0f %% of a new drive.\n\n",
		f.HorizonMonths, f.Months[0].Month, f.Months[len(f.Months)-1].Month, f.RefurbishShare*100)
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "MONTH\tCAPACITORS\tDRIVES\tFANS\tPARTS\tLABOUR_H\tLABOUR\tTOTAL\t")
	for _, m := range f.Months {
		fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%s\t%s\t%s\t%s\t\n", m.Month, m.CapacitorRefurbishments, m.DriveReplacements, m.FanReplacements,
			money(m.PartsCost), hours(m.LabourH), money(m.LabourCost), money(m.TotalCost))
	}
	for _, t := range []struct {
		name string
		r    BudgetRow
	}{{"total", f.Totals.Expected}, {"earliest", f.Totals.EarliestCase}, {"latest", f.Totals.LatestCase}} {
		r := t.r
		fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%s\t%s\t%s\t%s\t\n", t.name, r.CapacitorRefurbishments, r.DriveReplacements, r.FanReplacements,
			money(r.PartsCost), hours(r.LabourH), money(r.LabourCost), money(r.TotalCost))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\n%d replacements in the horizon (earliest and latest cases use each item's band).\n", len(f.Items))
	if len(f.Items) == 0 {
		return nil
	}
	tw = tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "END_OF_LIFE\tEARLIEST\tLATEST\tSITE\tPOSITION\tDRIVE\tMODEL\tCOMPONENT\tCYCLE\tACTION\tTOTAL")
	for _, it := range f.Items {
		pos := it.Position
		if pos == "" {
			pos = "stores"
		}
		eol := it.EndOfLife.Format(time.DateOnly)
		if it.Overdue {
			eol += " (overdue)"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%s\t%s\n", eol, it.EndOfLifeEarliest.Format(time.DateOnly), day(it.EndOfLifeLatest),
			it.Site, pos, it.Serial, it.Model, it.Component, it.Cycle, it.Action, money(it.TotalCost))
	}
	return tw.Flush()
}

// ReliabilityTable prints the fits, the spares and the backtest.
func ReliabilityTable(w io.Writer, r Reliability) error {
	fmt.Fprintf(w, "Fleet reliability: Weibull fits by maximum likelihood, %.0f %% Fisher-matrix bounds; expected failures over %.0f h.\n",
		r.Settings.Confidence*100, r.Settings.ExpectedHorizonH)
	for _, a := range r.AgeDefinitions {
		fmt.Fprintf(w, "  %s: %s = %s\n", a.Modes, a.Basis, a.Meaning)
	}
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "DIMENSION\tGROUP\tMODE\tLIVES\tFAILURES\tSHAPE\tSCALE_H\tB10_H\tB10_BOUNDS_H\tRUNNING\tEXPECTED\tSTATUS")
	for _, g := range r.Groups {
		if g.Fit == nil {
			fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%d\t-\t-\t-\t-\t%d\t-\t%s\n", g.Dimension, g.Group, g.Mode, g.Lives, g.Failures, g.RunningUnits, g.Note)
			continue
		}
		f := g.Fit
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%d\t%.3f\t%.0f\t%.0f\t%.0f-%.0f\t%d\t%.2f\tfitted\n", g.Dimension, g.Group, g.Mode, g.Lives, g.Failures,
			f.Shape, f.Scale, f.B10H, f.B10Bounds.Lower, f.B10Bounds.Upper, g.RunningUnits, *g.ExpectedFailures)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintln(w, "\nSpare drives over the replenishment lead time (Poisson demand):")
	tw = tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	head := "MODEL\tLEAD_D\tRUNNING\tIN_STORES\tON_HAND\tDEMAND"
	for _, l := range r.Settings.ServiceLevels {
		head += fmt.Sprintf("\tHOLD_%.0f", l*100)
	}
	fmt.Fprintln(tw, head+"\tSHORTFALL")
	for _, s := range r.Spares {
		line := fmt.Sprintf("%s\t%.0f\t%d\t%d\t%d\t%.3f", s.Model, s.LeadTimeDays, s.RunningUnits, s.InStores, s.SparesOnHand, s.ExpectedDemand)
		for _, p := range s.Levels {
			line += fmt.Sprintf("\t%d", p.Hold)
		}
		fmt.Fprintln(tw, line+fmt.Sprintf("\t%d", s.Shortfall))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\nBacktest of the capacitor life model: %s\n", r.Backtest.Reading)
	return nil
}

// WorkOrdersTable prints the orders and their lines, and the caution.
func WorkOrdersTable(w io.Writer, orders []store.WorkOrder) error {
	fmt.Fprintf(w, "Work orders: %d\n\n", len(orders))
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ORDER\tSTATUS\tDUE\tPRIORITY\tWHERE\tPOSITION\tDRIVE\tTASK\tLABOUR_H\tEXTERNAL_REF")
	for _, o := range orders {
		where := o.SiteName
		if o.AreaName != "" {
			where = o.AreaName + ", " + o.SiteName
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%d\t%s\t\t\t%d tasks\t%s\t%s\n", o.ID, o.Status, o.DueAt.Format(time.DateOnly), o.Priority, where,
			len(activeLines(o)), hours(o.LabourH), o.ExternalRef)
		for _, l := range activeLines(o) {
			pos := l.PositionTag
			if pos == "" {
				pos = "stores"
			}
			task := string(l.Task)
			if l.CauseClearedAt != nil {
				task += " (cause cleared)"
			}
			fmt.Fprintf(tw, "\t\t%s\t%d\t\t%s\t%s\t%s\t%s\t\n", l.DueAt.Format(time.DateOnly), l.Priority, pos, l.DriveSerial, task, hours(l.LabourH))
		}
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\nCaution: %s\n", health.SafetyCaution)
	return nil
}

func activeLines(o store.WorkOrder) []store.WorkOrderLine {
	var out []store.WorkOrderLine
	for _, l := range o.Lines {
		if l.State == store.LineActive {
			out = append(out, l)
		}
	}
	return out
}

// WriteGroupsCSV writes the fits, one row per group and mode.
func WriteGroupsCSV(w io.Writer, r Reliability) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"dimension", "group", "mode", "age_basis", "lives", "failures", "suspensions", "status", "shape", "shape_lower",
		"shape_upper", "scale_h", "scale_lower_h", "scale_upper_h", "b10_h", "b10_lower_h", "b10_upper_h", "running_units",
		"expected_failures", "note"})
	for _, g := range r.Groups {
		row := []string{g.Dimension, g.Group, g.Mode, g.AgeBasis, strconv.Itoa(g.Lives), strconv.Itoa(g.Failures),
			strconv.Itoa(g.Suspensions), string(g.Status)}
		if f := g.Fit; f != nil {
			row = append(row, num(f.Shape), num(f.ShapeBounds.Lower), num(f.ShapeBounds.Upper), num(f.Scale), num(f.ScaleBounds.Lower),
				num(f.ScaleBounds.Upper), num(f.B10H), num(f.B10Bounds.Lower), num(f.B10Bounds.Upper))
		} else {
			row = append(row, "", "", "", "", "", "", "", "", "")
		}
		exp := ""
		if g.ExpectedFailures != nil {
			exp = num(*g.ExpectedFailures)
		}
		cw.Write(append(row, strconv.Itoa(g.RunningUnits), exp, g.Note))
	}
	cw.Flush()
	return cw.Error()
}

// WriteSparesCSV writes the spares, one row per model and service level.
func WriteSparesCSV(w io.Writer, r Reliability) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"model", "lead_time_days", "running_units", "in_stores", "spares_on_hand", "expected_demand",
		"service_level_fraction", "hold", "hold_level_fraction", "on_hand_level_fraction", "shortfall"})
	for _, s := range r.Spares {
		for _, p := range s.Levels {
			cw.Write([]string{s.Model, num(s.LeadTimeDays), strconv.Itoa(s.RunningUnits), strconv.Itoa(s.InStores),
				strconv.Itoa(s.SparesOnHand), num(s.ExpectedDemand), num(p.ServiceLevel), strconv.Itoa(p.Hold),
				num(p.HoldLevel), num(p.OnHandLevel), strconv.Itoa(p.Shortfall)})
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteBacktestCSV writes the capacitor failures and the life used at each.
func WriteBacktestCSV(w io.Writer, r Reliability) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"drive_serial", "model", "component_id", "failed_at", "age_h", "covered", "assessed_on", "life_used_fraction", "note"})
	for _, b := range r.Backtest.Failures {
		used := ""
		if b.LifeUsedFraction != nil {
			used = num(*b.LifeUsedFraction)
		}
		cw.Write([]string{b.Serial, b.Model, itoa(b.ComponentID), ts(&b.FailedAt), num(b.AgeH), strconv.FormatBool(b.Covered),
			b.AssessedOn, used, b.Note})
	}
	cw.Flush()
	return cw.Error()
}
