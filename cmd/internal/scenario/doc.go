// Package scenario reads phipsi scenario files: TOML documents in SI units
// that describe a flow passage (fluid, inflow, channel walls, grid, solver
// settings, obstacles, probes and outputs).
//
// Load reads a file and Parse decodes bytes already read. Both decode the
// document strictly and check every value on its own: unknown keys, wrong
// types, missing required keys, non-finite numbers (TOML allows nan and inf),
// values out of range, names outside the portable set, keys that do not
// belong to an obstacle's shape, malformed wall profiles and polygon points
// files. Defaults are filled in, so that every field of the returned Scenario
// means what its comment says. Geometry that depends on several values at once
// (an obstacle outside the channel or touching a wall, a self-intersecting
// polygon, walls that cross, a probe outside the fluid, a grid too large for
// memory) is checked when the mesh is built, not here.
//
// Every error is an *Error. It carries the file, the 1-based line and column
// where the TOML parser knows them (columns count characters, not bytes), the
// key path of the offending value and a message that says what is wrong and
// what is allowed:
//
//	flume.toml:12:10: obstacle[1].radius: must be > 0, got -0.1
//
// Key paths join table keys with '.' and index arrays of tables and array
// elements from 0 in brackets: "obstacle[1].radius", "channel.lower[3]",
// "probe[0].at". Scenario.Errorf builds an error positioned the same way for
// checks done later on a decoded scenario, falling back to the nearest
// enclosing key whose position is known.
//
// A polygon's points may be given inline or in a CSV file of x,y rows named
// by points_file, relative to the scenario's directory. The file may start
// with a header (a first row none of whose fields is a number) and may hold
// blank lines and '#' comments. A bad row is reported with the points file's
// own path and line.
//
// The first error found is returned. Sections are checked in the order name,
// title, fluid, inflow, channel, grid, solver, obstacles, probes, output;
// within a table, unknown keys are reported before the values, so that a
// misspelt key is not reported as a missing one.
package scenario
