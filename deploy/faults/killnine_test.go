package faults

import (
	"context"
	"fmt"
	"math/rand/v2"
	"net/http"
	"sync"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// Shape of the kill -9 test: each round senders post batches until the
// server is killed at a random moment.
const (
	killRounds    = 3
	killSenders   = 4
	killBatchSize = 250
	// killMinAcks is how many batches must be acknowledged in a round
	// before the kill may come, so every round kills a busy server.
	killMinAcks = 6
	// killStep spaces a position's readings; batches of one sender
	// follow each other in time, so every reading has its own time.
	killStep = time.Minute
)

// sentBatch is one batch a sender posted: position p's readings k0 …
// k0+killBatchSize-1.
type sentBatch struct {
	p, k0 int
}

// ledger records what the senders were told.
type ledger struct {
	mu      sync.Mutex
	acked   []sentBatch
	unacked []sentBatch
}

func (l *ledger) record(b sentBatch, ok bool) {
	l.mu.Lock()
	defer l.mu.Unlock()
	if ok {
		l.acked = append(l.acked, b)
	} else {
		l.unacked = append(l.unacked, b)
	}
}

func (l *ledger) ackCount() int {
	l.mu.Lock()
	defer l.mu.Unlock()
	return len(l.acked)
}

// TestKillNineDuringIngest kills the server with SIGKILL while senders
// stream readings, restarts it, replays the batches whose answer never
// came, and checks that every acknowledged reading (a 2xx received) is
// stored exactly once: on PostgreSQL and SQLite, over several rounds.
func TestKillNineDuringIngest(t *testing.T) {
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			testKillNine(t, d)
		})
	}
}

func testKillNine(t *testing.T, d store.Dialect) {
	url := storetest.URL(t, d)
	st := openStore(t, url)
	f := buildFleet(t, st, killSenders)
	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	env := map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_BOOTSTRAP_TOKEN": secret}
	args := []string{"--assess-schedule", "off", "--retention-schedule", "off", "--rate-limit", "0"}
	seed := uint64(time.Now().UnixNano())
	t.Logf("seed %d", seed)
	rng := rand.New(rand.NewPCG(seed, 0x6b696c6c))

	var (
		all     ledger // every acknowledgement over all rounds
		pending []sentBatch
		next    = make([]int, killSenders) // next reading index per position
	)
	for round := 0; round <= killRounds; round++ {
		srv := startServer(t, env, args...)
		srv.waitReadyz(t, http.StatusOK, startTimeout)
		c := newClient(srv.base, secret)

		// Replay what the last round never heard back about: each batch
		// is stored once, whether or not it had landed before the kill.
		landed := 0
		for _, b := range pending {
			rows := batch(f.tags[b.p], b.p, b.k0, killBatchSize, killStep)
			a, res, err := c.postReadings(context.Background(), rows)
			if err != nil || a.status != http.StatusOK {
				t.Fatalf("round %d: replay of position %d from %d: %v %d %s", round, b.p, b.k0, err, a.status, a.short())
			}
			if res.Inserted+res.AlreadyPresent != killBatchSize || len(res.Conflicts) != 0 || len(res.Rejected) != 0 {
				t.Fatalf("round %d: replay answered %+v", round, res)
			}
			if res.AlreadyPresent == killBatchSize {
				landed++
			} else if res.Inserted != killBatchSize {
				t.Fatalf("round %d: replay half landed: %+v (a batch is one transaction)", round, res)
			}
			all.record(b, true)
		}
		if len(pending) > 0 {
			t.Logf("round %d: replayed %d unacknowledged batches, %d of them had landed before the kill", round, len(pending), landed)
		}
		pending = nil
		if round == killRounds {
			checkExactlyOnce(t, st, c, f, all.acked)
			if code := srv.terminate(t); code != 0 {
				t.Errorf("exit status %d after SIGTERM", code)
			}
			return
		}

		// Stream batches until the kill.
		var (
			rl   ledger
			wg   sync.WaitGroup
			stop = make(chan struct{})
		)
		for p := 0; p < killSenders; p++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					select {
					case <-stop:
						return
					default:
					}
					b := sentBatch{p: p, k0: next[p]}
					next[p] += killBatchSize
					a, res, err := c.postReadings(context.Background(), batch(f.tags[p], p, b.k0, killBatchSize, killStep))
					ok := err == nil && a.status == http.StatusOK
					if ok && (res.Inserted != killBatchSize || len(res.Conflicts) != 0) {
						t.Errorf("new batch answered %+v", res)
					}
					if err == nil && !ok {
						t.Errorf("new batch answered %d %s", a.status, a.short())
					}
					rl.record(b, ok)
					if !ok {
						return // the server is gone
					}
				}
			}()
		}
		if !poll(startTimeout, 5*time.Millisecond, func() bool { return rl.ackCount() >= killMinAcks }) {
			close(stop)
			wg.Wait()
			t.Fatalf("round %d: only %d batches acknowledged in %v", round, rl.ackCount(), startTimeout)
		}
		time.Sleep(time.Duration(rng.IntN(400)) * time.Millisecond) // the random moment of the kill
		srv.kill9(t)
		close(stop)
		wg.Wait()
		for _, b := range rl.acked {
			all.record(b, true)
		}
		pending = rl.unacked
		t.Logf("round %d: %d batches acknowledged, %d without an answer at the kill", round, len(rl.acked), len(rl.unacked))
	}
}

// checkExactlyOnce checks that the store holds exactly the acknowledged
// readings, each once: by a count over (drive, time) in SQL and by reading
// every drive back through the API.
func checkExactlyOnce(t *testing.T, st *store.Store, c *client, f fleet, acked []sentBatch) {
	t.Helper()
	ctx := context.Background()
	want := map[string]map[int64]bool{} // tag → Unix microseconds
	for _, b := range acked {
		tag := f.tags[b.p]
		if want[tag] == nil {
			want[tag] = map[int64]bool{}
		}
		for k := b.k0; k < b.k0+killBatchSize; k++ {
			at := readingAt(k, killStep).UnixMicro()
			if want[tag][at] {
				t.Fatalf("batch of %s at %v acknowledged twice", tag, at)
			}
			want[tag][at] = true
		}
	}
	var total, distinct int64
	err := st.SQL().QueryRowContext(ctx, `SELECT count(*), (SELECT count(*) FROM (SELECT DISTINCT drive_id, at FROM readings) AS k) FROM readings`).
		Scan(&total, &distinct)
	if err != nil {
		t.Fatalf("count readings: %v", err)
	}
	wantTotal := int64(len(acked) * killBatchSize)
	if total != wantTotal || distinct != total {
		t.Fatalf("%d readings stored (%d distinct drive and time), want %d acknowledged", total, distinct, wantTotal)
	}
	// Read every drive back page by page through the API.
	for p, tag := range f.tags {
		cursor := ""
		for {
			path := fmt.Sprintf("/api/v1/drives/%d/readings?limit=10000", f.driveIDs[p])
			if cursor != "" {
				path += "&cursor=" + cursor
			}
			var page store.Page[store.Reading]
			decode(t, c.mustDo(t, http.MethodGet, path, nil, http.StatusOK), &page)
			for _, r := range page.Items {
				if r.Position != tag || !want[tag][r.At.UnixMicro()] {
					t.Fatalf("drive %s holds a reading at %s %v that was never acknowledged", tag, r.Position, r.At)
				}
				delete(want[tag], r.At.UnixMicro())
			}
			if cursor = page.Next; cursor == "" {
				break
			}
		}
		if len(want[tag]) != 0 {
			t.Fatalf("drive at %s: %d acknowledged readings missing", tag, len(want[tag]))
		}
	}
	t.Logf("%d acknowledged batches, %d readings, each stored once", len(acked), total)
}
