package jobs

import (
	"strings"
	"testing"
	"time"
)

func utcTime(s string) time.Time {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		panic(err)
	}
	return t.UTC()
}

func TestLastTick(t *testing.T) {
	t.Parallel()
	cases := []struct {
		spec    string
		seconds bool
		now     string
		want    string
	}{
		// The defaults.
		{"*/15 * * * *", false, "2026-03-01T12:00:00Z", "2026-03-01T12:00:00Z"},
		{"*/15 * * * *", false, "2026-03-01T12:00:00.000001Z", "2026-03-01T12:00:00Z"},
		{"*/15 * * * *", false, "2026-03-01T12:14:59.999Z", "2026-03-01T12:00:00Z"},
		{"*/15 * * * *", false, "2026-03-01T12:15:03Z", "2026-03-01T12:15:00Z"},
		{"30 1 * * *", false, "2026-03-02T01:29:59Z", "2026-03-01T01:30:00Z"},
		{"30 1 * * *", false, "2026-03-02T01:30:02Z", "2026-03-02T01:30:00Z"},
		{"15 2 * * *", false, "2026-01-01T00:00:00Z", "2025-12-31T02:15:00Z"},
		// Seconds field, as the tests schedule.
		{"*/2 * * * * *", true, "2026-03-01T12:00:03.5Z", "2026-03-01T12:00:02Z"},
		{"*/2 * * * * *", true, "2026-03-01T12:00:04Z", "2026-03-01T12:00:04Z"},
		// Sparse: yearly on 29 February.
		{"0 0 29 2 *", false, "2027-06-01T00:00:00Z", "2024-02-29T00:00:00Z"},
		// Dense burst far behind: every second of minute 0 of each hour.
		{"* 0 * * * *", true, "2026-03-01T12:40:00Z", "2026-03-01T12:00:59Z"},
	}
	for _, c := range cases {
		sched, err := parseSchedule(c.spec, c.seconds)
		if err != nil {
			t.Fatalf("%s: %v", c.spec, err)
		}
		if got := lastTick(sched, utcTime(c.now)); !got.Equal(utcTime(c.want)) {
			t.Errorf("lastTick(%q, %s) = %s, want %s", c.spec, c.now, got.Format(time.RFC3339Nano), c.want)
		}
	}
}

// TestSkewedClocksAgreeOnTick: two replicas firing the same schedule, one
// with a clock 3 s slow, compute the same tick.
func TestSkewedClocksAgreeOnTick(t *testing.T) {
	t.Parallel()
	sched, err := parseSchedule("*/15 * * * *", false)
	if err != nil {
		t.Fatal(err)
	}
	real := utcTime("2026-03-01T12:15:00.004Z")
	for _, skew := range []time.Duration{0, -3 * time.Second, 2 * time.Second} {
		// The replica fires when its own clock reaches 12:15:00.
		fired := real.Add(-skew)
		if got := lastTick(sched, fired.Add(skew).Add(tickGrace)); !got.Equal(utcTime("2026-03-01T12:15:00Z")) {
			t.Errorf("skew %v: tick %s", skew, got)
		}
	}
}

func TestParseScheduleRefuses(t *testing.T) {
	t.Parallel()
	cases := []struct {
		spec    string
		seconds bool
		want    string
	}{
		{"@every 5m", false, "@every"},
		{"*/15 * * *", false, "expected exactly 5 fields"},
		{"*/2 * * * * *", false, "expected exactly 5 fields"},
		{"0 0 30 2 *", false, "never fires"},
		{"61 * * * *", false, "above maximum"},
	}
	for _, c := range cases {
		_, err := parseSchedule(c.spec, c.seconds)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("parseSchedule(%q) = %v, want an error containing %q", c.spec, err, c.want)
		}
	}
	for _, ok := range []string{"*/15 * * * *", "@daily", "CRON_TZ=UTC 30 1 * * *"} {
		if _, err := parseSchedule(ok, false); err != nil {
			t.Errorf("parseSchedule(%q): %v", ok, err)
		}
	}
}

// TestClockScheduleShiftsFiring: a clock 3 s slow makes the entry fire 3 s
// later on the host clock, when its own clock reads the scheduled time.
func TestClockScheduleShiftsFiring(t *testing.T) {
	t.Parallel()
	sched, err := parseSchedule("*/2 * * * * *", true)
	if err != nil {
		t.Fatal(err)
	}
	host := utcTime("2026-03-01T12:00:00.5Z")
	cases := []struct {
		offset time.Duration
		want   string
	}{
		// The host clock: the next even second.
		{0, "2026-03-01T12:00:02Z"},
		// 3 s slow: the clock reads 11:59:57.5, its next even second is
		// 11:59:58, which the host reaches at 12:00:01.
		{-3 * time.Second, "2026-03-01T12:00:01Z"},
		// 1 s fast: the clock reads 12:00:01.5, its next is 12:00:02,
		// which the host reaches at 12:00:01.
		{time.Second, "2026-03-01T12:00:01Z"},
	}
	for _, c := range cases {
		cs := clockSchedule{inner: sched, offset: func() time.Duration { return c.offset }, due: &dueTimes{}}
		if got := cs.Next(host); !got.Equal(utcTime(c.want)) {
			t.Errorf("offset %v: next %s, want %s", c.offset, got.Format(time.RFC3339Nano), c.want)
		}
	}
}

// TestClockScheduleQueuesDueTimes: each time handed to cron is queued in
// the scheduler's clock and taken oldest first, so a firing that runs late
// still names the tick it was due for.
func TestClockScheduleQueuesDueTimes(t *testing.T) {
	t.Parallel()
	sched, err := parseSchedule("*/15 * * * *", false)
	if err != nil {
		t.Fatal(err)
	}
	due := &dueTimes{}
	cs := clockSchedule{inner: sched, offset: func() time.Duration { return -3 * time.Second }, due: due}
	host := utcTime("2026-03-01T12:00:10Z")
	first := cs.Next(host)                         // the clock reads 12:00:07; next 12:15 on the clock
	second := cs.Next(first.Add(time.Millisecond)) // cron asks again right after firing
	if !first.Equal(utcTime("2026-03-01T12:15:03Z")) || !second.Equal(utcTime("2026-03-01T12:30:03Z")) {
		t.Fatalf("host firing times %s, %s", first, second)
	}
	for _, want := range []string{"2026-03-01T12:15:00Z", "2026-03-01T12:30:00Z"} {
		got, ok := due.pop()
		if !ok || !got.Equal(utcTime(want)) {
			t.Errorf("pop = %s %v, want %s", got, ok, want)
		}
	}
	if _, ok := due.pop(); ok {
		t.Error("queue not empty")
	}
}
