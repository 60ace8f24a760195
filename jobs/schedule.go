package jobs

import (
	"errors"
	"fmt"
	"slices"
	"sync"
	"time"

	"github.com/robfig/cron/v3"
)

// Off is the schedule value that leaves a job to manual runs only.
const Off = "off"

// tickGrace is how far past the clock reading the scheduler still takes a
// scheduled time as due. It absorbs a timer that wakes a hair before its
// time after a wall-clock step; it is far below any schedule's period.
const tickGrace = 100 * time.Millisecond

// parseSchedule reads a cron expression: five fields (minute hour
// day-of-month month day-of-week) or, with seconds, also six with a
// leading seconds field; descriptors such as @daily work too, and a CRON_TZ=
// prefix picks a zone (UTC otherwise). @every is refused: its times count
// from whenever the process started, so replicas could not agree on a
// tick.
func parseSchedule(spec string, seconds bool) (cron.Schedule, error) {
	fields := cron.Minute | cron.Hour | cron.Dom | cron.Month | cron.Dow | cron.Descriptor
	if seconds {
		fields |= cron.SecondOptional
	}
	sched, err := cron.NewParser(fields).Parse(spec)
	if err != nil {
		return nil, err
	}
	if _, ok := sched.(cron.ConstantDelaySchedule); ok {
		return nil, errors.New("@every counts from process start, so replicas cannot agree on its ticks; write a cron expression")
	}
	if sched.Next(time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC)).IsZero() {
		return nil, fmt.Errorf("%q never fires", spec)
	}
	return sched, nil
}

// lastTick returns the latest scheduled time of sched at or before now,
// or the zero time when there is none within about eight years. Replicas
// whose clocks differ by less than a period compute the same tick for the
// same firing, which is what lets job_runs' (job, tick) key claim it once.
func lastTick(sched cron.Schedule, now time.Time) time.Time {
	for back := time.Second; back <= 1<<28*time.Second; back *= 2 {
		t := sched.Next(now.Add(-back))
		if t.IsZero() {
			return time.Time{}
		}
		if t.After(now) {
			continue
		}
		for {
			n := sched.Next(t)
			if n.IsZero() || n.After(now) {
				return t.UTC()
			}
			t = n
		}
	}
	return time.Time{}
}

// clockSchedule runs a schedule on the scheduler's clock while cron's
// timers run on the host's: it shifts each next time by the clock's offset
// from the host. With the host clock (production) the offset is zero; a
// test clock running 3 s behind makes the entry fire 3 s late, as a replica
// with a slow clock would.
//
// It also keeps each scheduled time it hands cron, in the scheduler's
// clock, in due: cron fires an entry once per time it was given, in order,
// so the firing takes the oldest. A firing delayed past the next scheduled
// time by a loaded machine still claims the tick it was due for.
type clockSchedule struct {
	inner  cron.Schedule
	offset func() time.Duration
	due    *dueTimes
}

// Next implements cron.Schedule.
func (c clockSchedule) Next(host time.Time) time.Time {
	d := c.offset()
	n := c.inner.Next(host.Add(d))
	if n.IsZero() {
		return n
	}
	c.due.push(n.UTC())
	return n.Add(-d)
}

// dueTimes is a queue of scheduled times handed to cron and not yet fired.
type dueTimes struct {
	mu    sync.Mutex
	times []time.Time
}

func (q *dueTimes) push(t time.Time) {
	q.mu.Lock()
	defer q.mu.Unlock()
	q.times = append(q.times, t)
}

// pop takes the oldest due time.
func (q *dueTimes) pop() (time.Time, bool) {
	q.mu.Lock()
	defer q.mu.Unlock()
	if len(q.times) == 0 {
		return time.Time{}, false
	}
	t := q.times[0]
	q.times = slices.Delete(q.times, 0, 1)
	return t, true
}
