// Package sim is packwatch's pack simulator: a source like the bus sources
// that turns a physical model of a pack into the frames and console lines its
// profile describes, so a newcomer sees packwatch work without hardware and a
// technician can try a profile and its wiring before a pack is on the bench.
//
// The model (model.go) is a string of series cells, each a Thevenin
// equivalent circuit with one RC pair and its own capacity (cell.go, ocv.go),
// temperature sensors as lumped thermal nodes (thermal.go), a constant-current
// constant-voltage charger (charger.go) and loads with high-current bursts
// (scenario.go). A scenario is a list of steps (rest, charge, discharge) with
// per-cell and per-sensor differences and optional faults (fault.go).
//
// The encoder (encode.go, regen.go) is the inverse of the decoder: it walks
// the compiled profile's field layout and writes each simulated value into its
// frame bits, and generates console text from each line's RE2 pattern, so the
// simulated data goes through the real decode path.
//
// Sim (sim.go) runs it all: Run delivers batches to a bus.Sink from the
// caller's goroutine, paced in wall time by Options.Speed, with data time equal
// to simulated time. Pause, Resume, Advance and ForceCell let tests hold the
// simulator still and push a cell past its limit.
//
// Sign convention: current is positive when charging, as everywhere in
// packwatch.
package sim
