// Package report turns a solved scenario into what people and scripts read: the summary (JSON),
// the surface and field tables (CSV) and the console report. It writes to io.Writers; the command
// decides where the bytes go (and writes files atomically).
//
// Every number is written in shortest round-trip form; a value that does not exist is JSON null,
// never NaN. Every human-readable report carries the ideal-flow caution (Caution).
package report
