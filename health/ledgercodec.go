package health

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"slices"
)

// ledgerCodecVersion is the first byte of an encoded ledger.
const ledgerCodecVersion = 1

// MarshalBinary encodes the ledger compactly for storage: integers as
// varints, the day numbers as deltas, and the seconds of a bucket as a flag
// when it is a whole day (the usual case) and the ageing time when it equals
// the seconds (always, for a capacitor). A ledger of 400 days takes about
// 7 kB against about 40 kB of JSON, and decodes some fifty times faster;
// the store keeps one per component per drive and rewrites it on every run
// that takes in readings. Floats are stored bit for bit, so a round trip
// is exact. The varints are encoding/binary's (zig-zag signed, as in
// Protocol Buffers), the floats IEEE 754 bit patterns, little-endian.
func (l *LifeLedger) MarshalBinary() ([]byte, error) {
	b := make([]byte, 0, 128+len(l.Days)*20)
	b = append(b, ledgerCodecVersion)
	var flags byte
	if l.HasLast {
		flags |= 1
	}
	if l.Reached {
		flags |= 2
	}
	if l.HasCurrent {
		flags |= 4
	}
	b = append(b, flags)
	b = binary.AppendVarint(b, l.LastAt)
	b = binary.AppendVarint(b, l.FirstAt)
	b = binary.AppendVarint(b, l.ReachedAt)
	for _, f := range []float64{l.Damage, l.Seconds, l.AgingS, l.GapS} {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(f))
	}
	for _, n := range []int64{l.Samples, l.Skipped, l.Gaps, l.Air.Internal, l.Air.Estimated, l.Air.AmbientPlusRise, l.Air.Ambient, l.Air.Missing} {
		b = binary.AppendVarint(b, n)
	}
	b = appendDays(b, l.Days)
	if l.HasCurrent {
		prev := int32(0)
		if n := len(l.Days); n > 0 {
			prev = l.Days[n-1].Day
		}
		b = appendDay(b, l.Current, prev)
	}
	return b, nil
}

// appendDays appends a count and the day buckets, each day number as a
// delta from the one before.
func appendDays(b []byte, days []DayDamage) []byte {
	b = binary.AppendVarint(b, int64(len(days)))
	prev := int32(0)
	for _, d := range days {
		b = appendDay(b, d, prev)
		prev = d.Day
	}
	return b
}

// Day bucket flags.
const (
	dayWhole = 1 << iota // Seconds is 86400
	dayAging             // AgingS equals Seconds
)

func appendDay(b []byte, d DayDamage, prev int32) []byte {
	b = binary.AppendVarint(b, int64(d.Day)-int64(prev))
	var flags byte
	if d.Seconds == 86400 {
		flags |= dayWhole
	}
	if d.AgingS == d.Seconds {
		flags |= dayAging
	}
	b = append(b, flags)
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(d.Damage))
	if flags&dayWhole == 0 {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(d.Seconds))
	}
	if flags&dayAging == 0 {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(d.AgingS))
	}
	return binary.LittleEndian.AppendUint64(b, math.Float64bits(d.TempS))
}

// errLedgerCodec is a stored ledger that cannot be read.
var errLedgerCodec = errors.New("life ledger: corrupt encoding")

// ledgerReader reads an encoded ledger.
type ledgerReader struct {
	b   []byte
	err error
}

func (r *ledgerReader) varint() int64 {
	if r.err != nil {
		return 0
	}
	v, n := binary.Varint(r.b)
	if n <= 0 {
		r.err = errLedgerCodec
		return 0
	}
	r.b = r.b[n:]
	return v
}

func (r *ledgerReader) float() float64 {
	if r.err != nil || len(r.b) < 8 {
		r.err = errLedgerCodec
		return 0
	}
	v := math.Float64frombits(binary.LittleEndian.Uint64(r.b))
	r.b = r.b[8:]
	return v
}

func (r *ledgerReader) byte() byte {
	if r.err != nil || len(r.b) < 1 {
		r.err = errLedgerCodec
		return 0
	}
	v := r.b[0]
	r.b = r.b[1:]
	return v
}

func (r *ledgerReader) day(prev int32) DayDamage {
	var d DayDamage
	d.Day = prev + int32(r.varint())
	flags := r.byte()
	d.Damage = r.float()
	d.Seconds = 86400
	if flags&dayWhole == 0 {
		d.Seconds = r.float()
	}
	d.AgingS = d.Seconds
	if flags&dayAging == 0 {
		d.AgingS = r.float()
	}
	d.TempS = r.float()
	return d
}

// days reads what appendDays wrote and the last day number (0 with none).
func (r *ledgerReader) days() ([]DayDamage, int32) {
	n := r.varint()
	if r.err != nil {
		return nil, 0
	}
	if n < 0 || n > int64(len(r.b)) {
		r.err = errLedgerCodec
		return nil, 0
	}
	var out []DayDamage
	if n > 0 {
		out = make([]DayDamage, 0, n)
	}
	prev := int32(0)
	for range n {
		d := r.day(prev)
		out = append(out, d)
		prev = d.Day
	}
	return out, prev
}

// UnmarshalBinary decodes a ledger written by MarshalBinary.
func (l *LifeLedger) UnmarshalBinary(data []byte) error {
	r := &ledgerReader{b: data}
	if v := r.byte(); r.err == nil && v != ledgerCodecVersion {
		return fmt.Errorf("life ledger: encoding version %d, want %d", v, ledgerCodecVersion)
	}
	flags := r.byte()
	var out LifeLedger
	out.HasLast, out.Reached, out.HasCurrent = flags&1 != 0, flags&2 != 0, flags&4 != 0
	out.LastAt, out.FirstAt, out.ReachedAt = r.varint(), r.varint(), r.varint()
	out.Damage, out.Seconds, out.AgingS, out.GapS = r.float(), r.float(), r.float(), r.float()
	out.Samples, out.Skipped, out.Gaps = r.varint(), r.varint(), r.varint()
	out.Air = AirSourceCounts{Internal: r.varint(), Estimated: r.varint(), AmbientPlusRise: r.varint(), Ambient: r.varint(), Missing: r.varint()}
	var prev int32
	out.Days, prev = r.days()
	if out.HasCurrent {
		out.Current = r.day(prev)
	}
	if r.err != nil {
		return r.err
	}
	if len(r.b) != 0 {
		return fmt.Errorf("life ledger: %d trailing bytes", len(r.b))
	}
	*l = out
	return nil
}

// daysCodecVersion is the first byte of encoded closed days.
const daysCodecVersion = 1

// MarshalSplit encodes the ledger in two parts: the head, which is
// MarshalBinary's encoding without the closed day buckets, and the closed
// days on their own. The head changes with every reading; the closed days
// only when a day closes, once a day in service, so the store keeps them
// apart and rewrites the days only when they have changed (on a ledger of
// 400 days they are nearly all of its 7 kB).
func (l *LifeLedger) MarshalSplit() (head, days []byte, err error) {
	if head, err = l.MarshalHead(); err != nil {
		return nil, nil, err
	}
	return head, EncodeDays(l.Days), nil
}

// MarshalHead is the head MarshalSplit writes: the ledger without its
// closed days.
func (l *LifeLedger) MarshalHead() ([]byte, error) {
	h := *l
	h.Days = nil
	return h.MarshalBinary()
}

// EncodeDays encodes closed day buckets, oldest first, as MarshalSplit
// encodes a ledger's: any run of them can be encoded on its own, so the
// store can keep a ledger's days in pieces and rewrite only the piece a
// closing day changes.
func EncodeDays(days []DayDamage) []byte {
	b := make([]byte, 0, 8+len(days)*20)
	return appendDays(append(b, daysCodecVersion), days)
}

// DecodeDays decodes what EncodeDays wrote.
func DecodeDays(b []byte) ([]DayDamage, error) {
	return AppendDecodedDays(nil, b)
}

// AppendDecodedDays decodes what EncodeDays wrote and appends the days to
// dst. It reads the buckets in one loop with one length check each rather
// than through ledgerReader's checked reads: a store loads every closed day
// of every drive it assesses, and that halved the time.
func AppendDecodedDays(dst []DayDamage, b []byte) ([]DayDamage, error) {
	if len(b) == 0 {
		return dst, errLedgerCodec
	}
	if b[0] != daysCodecVersion {
		return dst, fmt.Errorf("life ledger days: encoding version %d, want %d", b[0], daysCodecVersion)
	}
	b = b[1:]
	n, k := binary.Varint(b)
	if k <= 0 || n < 0 || n > int64(len(b)) {
		return dst, errLedgerCodec
	}
	b = b[k:]
	dst = slices.Grow(dst, int(n))
	prev := int32(0)
	for range n {
		delta, k := binary.Varint(b)
		if k <= 0 || len(b) < k+1 {
			return dst, errLedgerCodec
		}
		flags := b[k]
		b = b[k+1:]
		size := 16
		if flags&dayWhole == 0 {
			size += 8
		}
		if flags&dayAging == 0 {
			size += 8
		}
		if len(b) < size {
			return dst, errLedgerCodec
		}
		d := DayDamage{Day: prev + int32(delta), Seconds: 86400}
		d.Damage = math.Float64frombits(binary.LittleEndian.Uint64(b))
		b = b[8:]
		if flags&dayWhole == 0 {
			d.Seconds = math.Float64frombits(binary.LittleEndian.Uint64(b))
			b = b[8:]
		}
		d.AgingS = d.Seconds
		if flags&dayAging == 0 {
			d.AgingS = math.Float64frombits(binary.LittleEndian.Uint64(b))
			b = b[8:]
		}
		d.TempS = math.Float64frombits(binary.LittleEndian.Uint64(b))
		b = b[8:]
		dst = append(dst, d)
		prev = d.Day
	}
	if len(b) != 0 {
		return dst, fmt.Errorf("life ledger days: %d trailing bytes", len(b))
	}
	return dst, nil
}

// UnmarshalSplit decodes the two parts MarshalSplit writes. With days nil
// the head is read as MarshalBinary wrote it, closed days included: the
// form ledgers were stored in before the split.
func (l *LifeLedger) UnmarshalSplit(head, days []byte) error {
	var out LifeLedger
	if err := out.UnmarshalBinary(head); err != nil {
		return err
	}
	if days == nil {
		*l = out
		return nil
	}
	if len(out.Days) != 0 {
		return fmt.Errorf("life ledger: closed days both in the head (%d) and apart", len(out.Days))
	}
	var err error
	if out.Days, err = DecodeDays(days); err != nil {
		return err
	}
	*l = out
	return nil
}
