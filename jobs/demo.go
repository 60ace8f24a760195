package jobs

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"sync"
	"time"

	"kelvard/store"
	"kelvard/store/demo"
)

// DemoSeed is the random seed of the demo fleet `serve --demo` loads.
const DemoSeed = 1

// DemoSetup loads the demo fleet into an empty store in the background,
// runs a first assessment and then a first planning pass (when the
// scheduler has the plan job); until all are done Ready reports what it is
// waiting for, so /readyz stays unready.
type DemoSetup struct {
	mu     sync.Mutex
	status string
	err    error
	done   chan struct{}
}

// StartDemo begins loading the demo fleet, generated to end at now, and
// returns at once. When the store already holds a register it logs so and
// leaves it alone. The first assessment and the first planning pass run
// through the scheduler, so they are recorded like any run.
func StartDemo(ctx context.Context, st *store.Store, sched *Scheduler, now time.Time, log *slog.Logger) *DemoSetup {
	d := &DemoSetup{status: "loading the demo fleet", done: make(chan struct{})}
	go func() {
		defer close(d.done)
		err := d.run(ctx, st, sched, now, log)
		d.mu.Lock()
		defer d.mu.Unlock()
		d.err = err
		if err != nil {
			log.Error("demo fleet", slog.Any("err", err))
			d.status = "the demo fleet could not be loaded: " + err.Error()
			return
		}
		d.status = ""
	}()
	return d
}

func (d *DemoSetup) set(status string) {
	d.mu.Lock()
	d.status = status
	d.mu.Unlock()
}

func (d *DemoSetup) run(ctx context.Context, st *store.Store, sched *Scheduler, now time.Time, log *slog.Logger) error {
	sc := demo.Generate(DemoSeed, now)
	start := time.Now()
	err := sc.Load(ctx, st, func(stage string, done, total int) {
		if total > 0 {
			d.set(fmt.Sprintf("loading the demo fleet: %s %d%%", stage, 100*done/total))
		}
	})
	switch {
	case errors.Is(err, demo.ErrNotEmpty):
		log.Info("the store already holds a register: the demo fleet was not loaded and nothing was changed")
	case err != nil:
		return err
	default:
		log.Info("demo fleet loaded", slog.Int("positions", len(sc.Positions)), slog.Int("drives", len(sc.Drives)),
			slog.Duration("took", time.Since(start).Round(time.Millisecond)))
	}
	d.set("running the first assessment")
	run, err := firstRun(ctx, sched, Assess)
	if err != nil {
		return fmt.Errorf("first assessment: %w", err)
	}
	log.Info("first assessment done", slog.String("note", run.Note))
	// Planning proposes the first work orders from the assessment's
	// findings and forecast, so the pages have work to approve at once.
	if !slices.Contains(sched.Names(), Plan) {
		log.Info("no plan job registered: no work orders are proposed")
		return nil
	}
	d.set("running the first planning pass")
	if run, err = firstRun(ctx, sched, Plan); err != nil {
		return fmt.Errorf("first planning pass: %w", err)
	}
	log.Info("first planning pass done", slog.String("note", run.Note))
	return nil
}

// firstRun runs a job once through the scheduler, so the run is recorded
// like any other. When a scheduled tick got there first it waits for that
// run and runs once more, so the whole fleet is covered after the load.
func firstRun(ctx context.Context, sched *Scheduler, name string) (store.JobRun, error) {
	for {
		run, err := sched.Run(ctx, name, nil)
		if errors.Is(err, ErrAlreadyRunning) {
			select {
			case <-ctx.Done():
				return run, ctx.Err()
			case <-time.After(time.Second):
			}
			continue
		}
		if err != nil {
			return run, err
		}
		if run.Status != store.JobSucceeded {
			return run, fmt.Errorf("%s: %s", run.Status, run.Error)
		}
		return run, nil
	}
}

// Ready returns nil once the fleet is loaded, assessed and planned, and
// otherwise an error saying what is still going on.
func (d *DemoSetup) Ready(context.Context) error {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.status == "" {
		return nil
	}
	return errors.New(d.status)
}

// Wait blocks until the setup has finished and returns its error.
func (d *DemoSetup) Wait(ctx context.Context) error {
	select {
	case <-d.done:
	case <-ctx.Done():
		return ctx.Err()
	}
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.err
}
