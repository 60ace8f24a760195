// Package faults holds kelvard's scripted fault tests. They build the real
// binary once, start it as child processes against fresh databases and
// break things around it, each within a bounded time:
//
//   - kill -9 during a stream of readings batches, restart, replay: every
//     acknowledged reading is stored exactly once (PostgreSQL and SQLite);
//   - PostgreSQL stopped and started (a private cluster made for the test)
//     during ingest and during an assessment: the server stays up, answers
//     503 with Retry-After while the database is away, turns unready and
//     ready again, and the assessment afterwards equals an undisturbed one;
//   - two server processes on one database with a two-second schedule:
//     every scheduled tick runs once, none twice, none lost;
//   - SIGTERM with a large readings POST and an assessment in flight: both
//     finish, the process exits 0 and the job's row is finished.
//
// The tests run one at a time: each loads the machine (server processes,
// assessments, a database cluster), and the rest of the suite runs beside
// them. The package has no code of its own; everything is in its tests.
package faults
