// Package sim is packwatch's pack simulator: a source like the bus sources
// that turns a physical model of a pack into the frames and console lines its
// profile describes, so a newcomer sees packwatch work without hardware and a
// technician can try a profile and its wiring before a pack is on the bench.
//
// The model (model.go) is a string of series cells, each a Thevenin
// equivalent circuit with one RC pair and its own capacity (cell.go, ocv.go),
// temperature sensors as lumped thermal nodes (thermal.go), with parameters
// scaled from the cell capacity (params.go). A scenario (scenario.go) is a
// list of steps with per-cell and per-sensor differences; story.go runs it:
// rests, a constant-current constant-voltage charge with a cutoff current
// (Model.CVCurrent), discharges with a steady draw and high-current bursts.
// Faults on request (fault.go) change the pack or what it reports.
//
// The encoder (encode.go, regen.go) is the inverse of the decoder: it walks
// the compiled profile's field layout and writes each simulated value into its
// frame bits, and generates console text from each line's RE2 pattern, so the
// simulated data goes through the real decode path.
//
// Sim (sim.go, run.go, control.go, generate.go) runs it all: Run delivers
// batches to a bus.Sink from the caller's goroutine, paced in wall time by
// Options.Speed, with data time equal to simulated time. Pause, Resume, Advance and ForceCell let tests hold the
// simulator still and push a cell past its limit.
//
// For "packwatch simulate", TargetSink (target.go) writes what Run delivers
// in the formats the bus sources read (capture file, console text, ASCII
// serial-line CAN, 16-byte frames), optionally at a fixed message rate for
// load tests, and Broadcaster (broadcast.go) serves 16-byte frames to the
// clients of a TCP listener, which a tcp-can source dials.
//
// Sign convention: current is positive when charging, as everywhere in
// packwatch.
package sim
