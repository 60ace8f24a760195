package store

import (
	"sync"
	"time"
)

// ingestState is what a Store remembers between batches: the readings
// partitions known to exist and, per drive, the latest reading time this
// process has stored. Neither is needed for correctness; both save work.
type ingestState struct {
	parts partitionSet
	high  highWater
}

// highWater holds, per drive, the latest reading time (Unix µs) this
// process has stored. A batch whose readings of a drive all come after it
// cannot meet a reading this process stored, so the PostgreSQL ingest
// skips the overlap query for that drive. The hint may be wrong (another
// replica, or a back-fill of readings older than ones stored before this
// process started): the primary key still refuses a repeated reading, the
// COPY fails, and the retry asks the database about every drive.
type highWater struct {
	mu sync.Mutex
	at map[int64]int64
}

// clearAfter reports whether the drive's readings from lo on are newer
// than any this process stored for it.
func (h *highWater) clearAfter(drive int64, lo time.Time) bool {
	h.mu.Lock()
	defer h.mu.Unlock()
	last, ok := h.at[drive]
	return ok && lo.UnixMicro() > last
}

// record notes that readings up to each drive's hi are stored.
func (h *highWater) record(sp map[int64]driveSpan) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.at == nil {
		h.at = make(map[int64]int64, len(sp))
	}
	for d, x := range sp {
		if hi := x.hi.UnixMicro(); hi > h.at[d] {
			h.at[d] = hi
		}
	}
}

// forget drops the hints of the drives, after a COPY met a stored reading.
func (h *highWater) forget(sp map[int64]driveSpan) {
	h.mu.Lock()
	defer h.mu.Unlock()
	for d := range sp {
		delete(h.at, d)
	}
}
