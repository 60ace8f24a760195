// Package health holds kelvard's engineering models: capacitor and fan life,
// derating and duty, enclosure against environment, cabinet heat balance,
// DC-bus checks, data quality, risk and fleet statistics.
//
// The package is pure: every function depends only on its arguments. It
// reads no clock, touches no database or network and keeps no global state;
// it imports only the standard library and gonum. Each exported function
// documents its formula, its source (a published reference, "common
// practice" or "from memory") and the range where it holds.
package health
