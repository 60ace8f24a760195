package web

import (
	"context"
	"fmt"
	"net/http"
	"net/http/httptest"
	"syscall"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// BenchmarkPages measures the server time of each page on the demo fleet
// (loaded once per store): the handler answers a request carrying a
// session cookie, as a signed-in browser sends it. The goal is under
// 100 ms a page on the project's 2-core machine.
//
//	go test ./web -run '^$' -bench Pages -benchtime 20x
func BenchmarkPages(b *testing.B) {
	for _, d := range storetest.Dialects {
		b.Run(string(d), func(b *testing.B) {
			f := loadFleet(b, d)
			ctx := context.Background()
			tok, err := f.st.Authenticate(ctx, f.planner)
			if err != nil {
				b.Fatal(err)
			}
			value, err := newSessionValue(f.h.cfg.SessionKey, tok.ID, tok.Hash, f.st.Now(), time.Hour)
			if err != nil {
				b.Fatal(err)
			}
			cookie := &http.Cookie{Name: sessionCookie, Value: value}
			v, err := f.st.Fleet(ctx, store.FleetFilter{Status: health.StatusInstalled}, demoNow, 1, 0)
			if err != nil || len(v.Rows) == 0 {
				b.Fatalf("riskiest drive: %v", err)
			}
			r := v.Rows[0]
			finding, err := f.st.FindingsList(ctx, store.FindingsFilter{}, 1, 0)
			if err != nil || len(finding.Rows) == 0 {
				b.Fatalf("a finding: %v", err)
			}
			site := largestSite(b, f)
			lines, err := f.st.WorkLines(ctx, store.WorkLinesFilter{DriveID: r.DriveID}, 1)
			if err != nil || len(lines) == 0 {
				b.Fatalf("the riskiest drive's work order: %v", err)
			}
			order := lines[0].WorkOrderID
			pages := []struct{ name, path string }{
				{"signin", "/signin"},
				{"fleet", "/fleet"},
				{"fleet_filtered", fmt.Sprintf("/fleet?site=%d&severity=minor&eol=365", r.SiteID)},
				{"sites", "/sites"},
				{"site", fmt.Sprintf("/sites/%d", site)},
				{"position", fmt.Sprintf("/positions/%d", *r.PositionID)},
				{"drive_30d", fmt.Sprintf("/drives/%d", r.DriveID)},
				{"drive_365d", fmt.Sprintf("/drives/%d?range=365d", r.DriveID)},
				{"findings", "/findings"},
				{"finding", fmt.Sprintf("/findings/%d", finding.Rows[0].ID)},
				{"settings", "/settings"},
				{"work_orders", "/work-orders"},
				{"work_orders_all", "/work-orders?status=all"},
				{"work_order", fmt.Sprintf("/work-orders/%d", order)},
				{"work_order_print", fmt.Sprintf("/work-orders/%d/print", order)},
				{"forecast", "/forecast"},
				{"forecast_120", "/forecast?horizon=120"},
				{"reliability", "/reliability"},
				{"reliability_fleet_any", "/reliability?dimension=fleet&mode=any"},
			}
			for _, p := range pages {
				b.Run(p.name, func(b *testing.B) {
					b.ReportAllocs()
					var worst time.Duration
					cpu0 := processCPU()
					for i := 0; i < b.N; i++ {
						req := httptest.NewRequest(http.MethodGet, p.path, nil)
						if p.name != "signin" {
							req.AddCookie(cookie)
						}
						rec := httptest.NewRecorder()
						start := time.Now()
						f.h.ServeHTTP(rec, req)
						worst = max(worst, time.Since(start))
						if rec.Code != http.StatusOK {
							b.Fatalf("%s: %d", p.path, rec.Code)
						}
					}
					b.ReportMetric(float64(b.Elapsed().Microseconds())/1000/float64(b.N), "ms/page")
					b.ReportMetric(float64(worst.Microseconds())/1000, "worst-ms")
					// CPU time of this process per page: what the page costs
					// the server (and SQLite, which runs in process), apart
					// from waiting on a busy machine.
					b.ReportMetric(float64((processCPU()-cpu0).Microseconds())/1000/float64(b.N), "cpu-ms/page")
				})
			}
		})
	}
}

// processCPU is the user and system CPU time this process has used.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// largestSite returns the id of the site with the most positions.
func largestSite(b *testing.B, f *fleet) int64 {
	b.Helper()
	places, err := f.st.Places(context.Background())
	if err != nil {
		b.Fatal(err)
	}
	best, n := int64(0), -1
	for _, p := range places {
		sv, err := f.st.Site(context.Background(), p.Site.ID)
		if err != nil {
			b.Fatal(err)
		}
		if len(sv.Positions) > n {
			best, n = p.Site.ID, len(sv.Positions)
		}
	}
	return best
}
