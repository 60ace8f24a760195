package jobs

import (
	"bufio"
	"context"
	"os"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/demo"
	"kelvard/store/storetest"
)

// demoNow is the reference time of testdata/demo.
var demoNow = time.Date(2026, 11, 30, 0, 0, 0, 0, time.UTC)

// readGolden reads testdata/demo/expected_findings.golden: the expected
// (subject, rule) pairs and the clean positions.
func readGolden(t *testing.T) (pairs []string, clean []string) {
	t.Helper()
	f, err := os.Open("../testdata/demo/expected_findings.golden")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	section := ""
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		switch {
		case line == "" || strings.HasPrefix(line, "#"):
		case strings.HasPrefix(line, "["):
			section = line
		case section == "[findings]":
			pairs = append(pairs, line)
		case section == "[clean]":
			clean = append(clean, line)
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return pairs, clean
}

// assessedPairs lists the (subject, rule) pairs of the unresolved findings:
// the position tag of an installed drive, drive:<serial> otherwise.
func assessedPairs(t *testing.T, st *store.Store) []string {
	t.Helper()
	ctx := context.Background()
	tags := map[int64]string{}
	for _, p := range listAll[store.Position](t, st) {
		tags[p.ID] = p.Tag
	}
	serials := map[int64]string{}
	for _, d := range listAll[store.Drive](t, st) {
		serials[d.ID] = d.Serial
	}
	var out []string
	q := store.ListQuery{Limit: store.MaxLimit, Filters: map[string]string{}}
	for {
		page, err := st.ListFindings(ctx, q)
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range page.Items {
			subject := "drive:" + serials[f.DriveID]
			if f.PositionID != nil {
				subject = tags[*f.PositionID]
			}
			out = append(out, subject+" "+f.Rule)
		}
		if page.Next == "" {
			break
		}
		q.Cursor = page.Next
	}
	slices.Sort(out)
	return slices.Compact(out)
}

func listAll[T any, P store.Record[T]](t *testing.T, st *store.Store) []T {
	t.Helper()
	var out []T
	q := store.ListQuery{Limit: store.MaxLimit}
	for {
		page, err := store.List[T, P](context.Background(), st, q)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, page.Items...)
		if page.Next == "" {
			return out
		}
		q.Cursor = page.Next
	}
}

// TestDemoFleetMatchesGolden loads the demo scenario into each store,
// assesses it and holds the findings to the golden file: every expected
// (position, rule) pair and nothing else, and no finding at all on the
// clean positions.
func TestDemoFleetMatchesGolden(t *testing.T) {
	if testing.Short() {
		t.Skip("loads 700 000 readings")
	}
	t.Parallel()
	want, clean := readGolden(t)
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		now := demoNow
		st := storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return now }})
		ctx := context.Background()
		start := time.Now()
		if err := demo.Generate(1, demoNow).Load(ctx, st, nil); err != nil {
			t.Fatal(err)
		}
		loaded := time.Since(start)
		as := NewAssessor(st, AssessConfig{Now: func() time.Time { return now }})
		sum, err := as.Assess(ctx, AssessOptions{})
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: loaded in %v; assessed %d drives, %d readings in %v", d, loaded.Round(time.Millisecond), sum.Drives, sum.Readings, sum.Took.Round(time.Millisecond))
		got := assessedPairs(t, st)
		var missing, extra []string
		for _, p := range want {
			if !slices.Contains(got, p) {
				missing = append(missing, p)
			}
		}
		for _, p := range got {
			if !slices.Contains(want, p) {
				extra = append(extra, p)
			}
		}
		if len(missing) > 0 || len(extra) > 0 {
			t.Errorf("assessment differs from the golden file:\nmissing (%d):\n  %s\nunexpected (%d):\n  %s",
				len(missing), strings.Join(missing, "\n  "), len(extra), strings.Join(extra, "\n  "))
		}
		for _, p := range got {
			if slices.Contains(clean, strings.Fields(p)[0]) {
				t.Errorf("clean position has a finding: %s", p)
			}
		}
		// Every drive that is not retired has a health answer.
		for _, dr := range listAll[store.Drive](t, st) {
			if dr.Status == "retired" {
				continue
			}
			if _, err := st.LatestAssessment(ctx, dr.ID); err != nil {
				t.Errorf("drive %s has no assessment: %v", dr.Serial, err)
			}
		}
	})
}
