package store

// ParseCSVQuoted exposes the encoding/csv path of ParseReadingsCSV, so the
// fuzz test can hold the hand split to it.
var ParseCSVQuoted = parseCSVQuoted
