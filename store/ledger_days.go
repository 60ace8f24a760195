package store

import (
	"bytes"
	"cmp"
	"context"
	"errors"
	"fmt"
	"slices"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
	"gorm.io/gorm"
	"gorm.io/gorm/clause"

	"kelvard/health"
)

// A life ledger keeps up to 400 closed day buckets, about 7 kB encoded.
// They are stored in chunks of dayChunkDays days, one ledger_day_chunks row
// each (migration 00013), so a day that closes rewrites its chunk and not
// the whole history: in service once a day per drive, on bench assess
// (fifty new hours per drive) on every run.
const dayChunkDays = 64

// ledgerDayChunk is one stored chunk of a ledger's closed days.
type ledgerDayChunk struct {
	DriveID int64 `gorm:"primaryKey"`
	Ledger  int16 `gorm:"primaryKey"`
	Chunk   int32 `gorm:"primaryKey"`
	Days    []byte
}

// TableName names the table.
func (ledgerDayChunk) TableName() string { return "ledger_day_chunks" }

// chunkOf is the chunk a day belongs to (floor division, so days before
// 1970 fall in negative chunks).
func chunkOf(day int32) int32 {
	q := day / dayChunkDays
	if day%dayChunkDays < 0 {
		q--
	}
	return q
}

// emptyDays is the days column of a state whose closed days are all in
// chunks.
var emptyDays = health.EncodeDays(nil)

// storedDays is what a state's closed days were when it was loaded: the
// chunks as stored and the decoded days, whose backing array a ledger
// advanced by new readings shares until a day closes.
type storedDays struct {
	chunks map[int32][]byte
	days   []health.DayDamage
}

// loadDayChunks reads the chunks of the drives' ledgers in drive, ledger
// and chunk order. It scans through database/sql on SQLite and with pgx on
// PostgreSQL: at fourteen rows a drive, GORM's reflection cost more than
// the query.
func (s *Store) loadDayChunks(ctx context.Context, db *gorm.DB, ids []int64) ([]ledgerDayChunk, error) {
	if s.dialect == Postgres {
		return s.loadDayChunksPG(ctx, ids)
	}
	rows, err := db.Raw("SELECT drive_id, ledger, chunk, days FROM ledger_day_chunks WHERE drive_id IN ? ORDER BY drive_id, ledger, chunk", ids).Rows()
	if err != nil {
		return nil, fmt.Errorf("load ledger days: %w", translate(err))
	}
	defer rows.Close()
	out := make([]ledgerDayChunk, 0, len(ids)*2*(400/dayChunkDays+2))
	for rows.Next() {
		var c ledgerDayChunk
		if err := rows.Scan(&c.DriveID, &c.Ledger, &c.Chunk, &c.Days); err != nil {
			return nil, fmt.Errorf("load ledger days: %w", translate(err))
		}
		out = append(out, c)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("load ledger days: %w", translate(err))
	}
	return out, nil
}

// loadDayChunksPG is loadDayChunks on PostgreSQL, on a pooled connection.
// Each chunk's days are copied once out of pgx's read buffer; through
// database/sql a bytea is copied twice (by the driver, then by Scan), which
// was about a sixteenth of the memory an incremental run allocates.
func (s *Store) loadDayChunksPG(ctx context.Context, ids []int64) ([]ledgerDayChunk, error) {
	conn, err := s.sqlDB.Conn(ctx)
	if err != nil {
		return nil, fmt.Errorf("load ledger days: %w", translate(err))
	}
	defer conn.Close()
	out := make([]ledgerDayChunk, 0, len(ids)*2*(400/dayChunkDays+2))
	err = rawRunner(conn)(func(c *pgx.Conn) error {
		rows, err := c.Query(ctx, "SELECT drive_id, ledger, chunk, days FROM ledger_day_chunks WHERE drive_id = ANY($1) ORDER BY drive_id, ledger, chunk", ids)
		if err != nil {
			return err
		}
		defer rows.Close()
		if f := rows.FieldDescriptions(); len(f) == 4 && f[3].Format != pgtype.BinaryFormatCode {
			return errors.New("days column is not in binary format")
		}
		for rows.Next() {
			var k ledgerDayChunk
			if err := rows.Scan(&k.DriveID, &k.Ledger, &k.Chunk, nil); err != nil {
				return err
			}
			k.Days = bytes.Clone(rows.RawValues()[3])
			out = append(out, k)
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("load ledger days: %w", translate(err))
	}
	return out, nil
}

// decodeLedgers decodes a loaded state's ledgers: the head, the days
// column (closed days written by versions before the chunks, or none) and
// the state's chunks, ledger by ledger in chunk order.
func (st *DriveState) decodeLedgers(chunks []ledgerDayChunk) error {
	for i, l := range st.ledgers() {
		if err := l.led.UnmarshalSplit(l.head, l.days); err != nil {
			return fmt.Errorf("drive %d %s ledger: %w", st.DriveID, l.name, err)
		}
		sd := storedDays{chunks: map[int32][]byte{}}
		for _, c := range chunks {
			if int(c.Ledger) != i {
				continue
			}
			if l.led.Days == nil {
				l.led.Days = make([]health.DayDamage, 0, len(chunks)*dayChunkDays/2)
			}
			from := len(l.led.Days)
			var err error
			if l.led.Days, err = health.AppendDecodedDays(l.led.Days, c.Days); err != nil {
				return fmt.Errorf("drive %d %s ledger, days of chunk %d: %w", st.DriveID, l.name, c.Chunk, err)
			}
			for k := from; k < len(l.led.Days); k++ {
				d := l.led.Days[k].Day
				if k > 0 && d <= l.led.Days[k-1].Day {
					return fmt.Errorf("drive %d %s ledger: day %d of chunk %d after day %d", st.DriveID, l.name, d, c.Chunk, l.led.Days[k-1].Day)
				}
				if chunkOf(d) != c.Chunk {
					return fmt.Errorf("drive %d %s ledger: day %d stored in chunk %d", st.DriveID, l.name, d, c.Chunk)
				}
			}
			sd.chunks[c.Chunk] = c.Days
		}
		sd.days = l.led.Days
		st.stored[i] = sd
	}
	return nil
}

// ledgerRef is one of a state's two ledgers with its stored columns;
// ledgers gives them in the order ledger_day_chunks numbers them (0 the
// capacitor bank, 1 the cooling fan).
type ledgerRef struct {
	name string
	led  *health.LifeLedger
	head []byte
	days NullBytes
}

func (st *DriveState) ledgers() [2]ledgerRef {
	return [2]ledgerRef{
		{"capacitor", &st.CapacitorState.LifeLedger, st.CapacitorLedger, st.CapacitorDays},
		{"fan", &st.FanState.LifeLedger, st.FanLedger, st.FanDays},
	}
}

// CarryStored carries over from the state loaded (nil for none) what the
// next save compares with to write only what changed: the closed days as
// stored.
func (st *DriveState) CarryStored(prev *DriveState) {
	if prev == nil {
		return
	}
	st.CapacitorDays, st.FanDays = prev.CapacitorDays, prev.FanDays
	st.stored = prev.stored
}

// dayChunkWrites are the chunk rows a batch's save writes and deletes.
type dayChunkWrites struct {
	put []ledgerDayChunk
	del []ledgerDayChunk // keys only
}

// encodeLedgers sets the stored forms of the state's ledgers for a save and
// adds the chunks whose days changed to w. The days column is set to
// emptyDays where it still holds days (they move into chunks) and to nil
// where it holds none already, which the upsert (stateUpsert) takes for
// "leave the column as it is". A ledger whose closed days are the ones
// loaded (the same array: none closed since) writes no chunk; otherwise
// each chunk whose days differ from those the stored chunk decoded to is
// encoded and written if its encoding differs too, and stored chunks that
// no longer hold a day are deleted.
func (st *DriveState) encodeLedgers(w *dayChunkWrites) error {
	st.sentChunks = 0
	heads := [2]*[]byte{&st.CapacitorLedger, &st.FanLedger}
	cols := [2]*NullBytes{&st.CapacitorDays, &st.FanDays}
	for i, l := range st.ledgers() {
		head, err := l.led.MarshalHead()
		if err != nil {
			return err
		}
		*heads[i] = head
		inColumn := !bytes.Equal(l.days, emptyDays)
		*cols[i] = nil
		if inColumn {
			*cols[i] = slices.Clone(emptyDays)
		}
		sd := st.stored[i]
		days := l.led.Days
		if !inColumn && len(days) == len(sd.days) && (len(days) == 0 || &days[0] == &sd.days[0]) {
			continue
		}
		kept := map[int32]bool{}
		j := 0 // the stored days from chunk c on
		for lo := 0; lo < len(days); {
			c := chunkOf(days[lo].Day)
			hi := lo + 1
			for hi < len(days) && chunkOf(days[hi].Day) == c {
				hi++
			}
			kept[c] = true
			for j < len(sd.days) && chunkOf(sd.days[j].Day) < c {
				j++
			}
			k := j
			for k < len(sd.days) && chunkOf(sd.days[k].Day) == c {
				k++
			}
			stored, ok := sd.chunks[c]
			if ok && !inColumn && sameDays(days[lo:hi], sd.days[j:k]) {
				// The days the stored chunk decoded to: no need to
				// encode them to see that nothing changed. (With days
				// still in the column, the loaded days are not all
				// from chunks: every chunk is encoded and compared.)
				lo = hi
				continue
			}
			enc := health.EncodeDays(days[lo:hi])
			if !ok || !bytes.Equal(enc, stored) {
				w.put = append(w.put, ledgerDayChunk{DriveID: st.DriveID, Ledger: int16(i), Chunk: c, Days: enc})
				st.sentChunks++
			}
			lo = hi
		}
		gone := make([]int32, 0)
		for c := range sd.chunks {
			if !kept[c] {
				gone = append(gone, c)
			}
		}
		slices.Sort(gone)
		for _, c := range gone {
			w.del = append(w.del, ledgerDayChunk{DriveID: st.DriveID, Ledger: int16(i), Chunk: c})
			st.sentChunks++
		}
	}
	return nil
}

// sameDays says whether a and b hold equal days. Struct equality covers
// every field; a NaN never equals, so a day holding one is encoded and its
// bytes compared instead.
func sameDays(a, b []health.DayDamage) bool { return slices.Equal(a, b) }

// writePG applies the chunk writes on the save's connection: a staged
// upsert (its staging table made by createStages) and one DELETE from
// arrays.
func (w *dayChunkWrites) writePG(ctx context.Context, c *pgx.Conn) error {
	slices.SortFunc(w.put, compareChunks)
	rows := make([][]any, len(w.put))
	for i, k := range w.put {
		rows[i] = []any{k.DriveID, k.Ledger, k.Chunk, k.Days}
	}
	if err := dayChunkUpsert.run(ctx, c, rows); err != nil {
		return fmt.Errorf("save ledger days: %w", err)
	}
	n := len(w.del)
	if n == 0 {
		return nil
	}
	drives, ledgers, chunks := make([]int64, n), make([]int16, n), make([]int32, n)
	for i, k := range w.del {
		drives[i], ledgers[i], chunks[i] = k.DriveID, k.Ledger, k.Chunk
	}
	if _, err := c.Exec(ctx, `DELETE FROM ledger_day_chunks c
		USING unnest($1::bigint[], $2::smallint[], $3::integer[]) AS v(drive_id, ledger, chunk)
		WHERE c.drive_id = v.drive_id AND c.ledger = v.ledger AND c.chunk = v.chunk`, drives, ledgers, chunks); err != nil {
		return fmt.Errorf("drop ledger days: %w", translate(err))
	}
	return nil
}

// writeGORM applies the chunk writes through GORM (SQLite, in process).
func (w *dayChunkWrites) writeGORM(tx *gorm.DB) error {
	slices.SortFunc(w.put, compareChunks)
	if len(w.put) > 0 {
		if err := tx.Clauses(clause.OnConflict{UpdateAll: true}).CreateInBatches(w.put, 200).Error; err != nil {
			return fmt.Errorf("save ledger days: %w", translate(err))
		}
	}
	for _, k := range w.del {
		if err := tx.Where("drive_id = ? AND ledger = ? AND chunk = ?", k.DriveID, k.Ledger, k.Chunk).Delete(&ledgerDayChunk{}).Error; err != nil {
			return fmt.Errorf("drop ledger days: %w", translate(err))
		}
	}
	return nil
}

func compareChunks(a, b ledgerDayChunk) int {
	return cmp.Or(cmp.Compare(a.DriveID, b.DriveID), cmp.Compare(a.Ledger, b.Ledger), cmp.Compare(a.Chunk, b.Chunk))
}
