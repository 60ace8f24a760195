package store

import (
	"errors"
	"testing"
	"time"
)

// checkCursorError holds what a refused cursor must be: a validation error
// naming the cursor.
func checkCursorError(t *testing.T, s string, err error) {
	t.Helper()
	var ve *ValidationError
	if !errors.As(err, &ve) || len(ve.Fields) != 1 || ve.Fields[0].Field != "cursor" || ve.Fields[0].Reason == "" {
		t.Fatalf("cursor %q refused with %v, want a validation error naming the cursor", s, err)
	}
}

// FuzzDecodeCursor: a list cursor from outside either decodes to an id the
// list can continue after (not negative; EncodeCursor of it decodes to it
// again) or is refused as a bad cursor; and every cursor EncodeCursor
// makes decodes to its id.
func FuzzDecodeCursor(f *testing.F) {
	for _, s := range []string{"", EncodeCursor(0), EncodeCursor(41), EncodeCursor(1 << 62), "eyJhIjotMX0", "eyJhIjoxLjV9", "eyJhIjoiMSJ9",
		"eyJhIjoxLCJhIjoyfQ", "e30", "bnVsbA", "W10", "eyJhIjo5MjIzMzcyMDM2ODU0Nzc1ODA4fQ", "%%%", "eyJhIjox fQ", "eyJhIjoxfQ=="} {
		f.Add(s, int64(7))
	}
	f.Fuzz(func(t *testing.T, s string, id int64) {
		after, err := DecodeCursor(s)
		switch {
		case err != nil:
			checkCursorError(t, s, err)
		case after < 0 || (s == "" && after != 0):
			t.Fatalf("DecodeCursor(%q) = %d", s, after)
		default:
			if again, err := DecodeCursor(EncodeCursor(after)); err != nil || again != after {
				t.Fatalf("cursor of %d (from %q) decodes to %d, %v", after, s, again, err)
			}
		}
		if id >= 0 {
			if got, err := DecodeCursor(EncodeCursor(id)); err != nil || got != id {
				t.Fatalf("EncodeCursor(%d) decodes to %d, %v", id, got, err)
			}
		}
	})
}

// FuzzDecodeReadingCursor: a readings cursor from outside either decodes
// to a time in the years 0001 to 9999 that encodes back to the same
// cursor value, or is refused as a bad cursor; every cursor made from a
// reading's time decodes to that time.
func FuzzDecodeReadingCursor(f *testing.F) {
	at := time.Date(2026, 1, 31, 8, 0, 0, 123456000, time.UTC)
	for _, s := range []string{"", encodeReadingCursor(at), encodeReadingCursor(time.Unix(0, 0)), "eyJ0Ijo5MjIzMzcyMDM2ODU0Nzc1ODA3fQ",
		"eyJ0IjotOTIyMzM3MjAzNjg1NDc3NTgwOH0", "eyJ0IjoiMjAyNi0wMS0zMSJ9", "eyJ0IjpudWxsfQ", "e30", "%%%"} {
		f.Add(s, at.UnixMicro())
	}
	f.Fuzz(func(t *testing.T, s string, micros int64) {
		after, has, err := decodeReadingCursor(s)
		switch {
		case err != nil:
			checkCursorError(t, s, err)
		case has != (s != ""):
			t.Fatalf("decodeReadingCursor(%q) has = %t", s, has)
		case has:
			tm := time.UnixMicro(after).UTC()
			if y := tm.Year(); y < 1 || y > 9999 {
				t.Fatalf("cursor %q decodes to %v, outside the years 0001 to 9999", s, tm)
			}
			if again, _, err := decodeReadingCursor(encodeReadingCursor(tm)); err != nil || again != after {
				t.Fatalf("cursor of %v (from %q) decodes to %d, %v", tm, s, again, err)
			}
		}
		tm := time.UnixMicro(micros).UTC()
		if y := tm.Year(); y >= 1 && y <= 9999 {
			if got, has, err := decodeReadingCursor(encodeReadingCursor(tm)); err != nil || !has || got != micros {
				t.Fatalf("the cursor of %v decodes to %d, %v", tm, got, err)
			}
		}
	})
}
