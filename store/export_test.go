package store

// ParseCSVQuoted exposes the encoding/csv path of ParseReadingsCSV, so the
// fuzz test can hold the hand split to it.
var ParseCSVQuoted = parseCSVQuoted

// SetScanGroupRows lowers the bound on a physical read of whole histories,
// so a test can make a group outgrow it.
func SetScanGroupRows(s *Store, n int) { s.scanGroupRows = n }

// SentDayChunks is how many closed-day chunks the last save of st wrote or
// deleted.
func SentDayChunks(st *DriveState) int { return st.sentChunks }

// DayChunkDays is the number of days in a chunk of ledger_day_chunks.
const DayChunkDays = dayChunkDays
