// Package analyze turns a recorded session into what a pack builder reads
// after a test: segments of rest, charge and discharge; voltage against
// amp-hours for the pack and each cell; capacity, energy and efficiency;
// the knee of a discharge curve and a cutoff voltage suggested from it; DC
// internal resistance from the current steps of normal use; incremental
// capacity (dQ/dV) and differential voltage (dV/dQ); high-current bursts;
// cell imbalance; and pre-charge events.
//
// In the data flow it sits beside the pack engine, not after it: it decodes
// the raw messages of a recording or capture again through decode.Map (a
// Collector), keeps every reading of the bindings it needs as a Trace on data
// time (a Session), and runs pure functions over the traces. Nothing here
// reads the decimated chart table; nothing here starts a goroutine.
//
// Sign convention: current is positive when charging, as everywhere in
// packwatch. Resistances come out positive for a healthy cell in either
// direction because ΔV and ΔI share their sign.
//
// packwatch is a monitor, never the protection: the results here describe a
// session after the fact and suggest settings for the pack's own BMS to
// enforce; they never trip anything.
package analyze
