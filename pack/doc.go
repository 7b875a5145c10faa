// Package pack holds the live state of one or more battery packs and derives
// what the page, the REST API, /metrics and the check read.
//
// Sources hand batches of messages to an Engine (Deliver). The engine takes
// its lock once per batch; for each message it runs the pack's compiled
// decode.Map, then, for every slot the message updated, the limit checks of
// that slot with their trip timers, and the charge counter when the slot is
// pack.current. Everything runs on data time (the messages' own clock): the
// engine never reads the wall clock, so a live session, a simulated one, a
// replay and `decode --state` over a capture reach the same states at the
// same data times. Aggregate limits (spread, deviation, temperature spread
// and rise) are checked on a fixed grid of data time, once per cell cycle.
//
// Derived values (min, max, averages, margins, time to full) are computed in
// Snapshot, once per tick, never per frame. NaN and ±Inf never reach a
// Snapshot: a missing or invalid reading is nil and marshals as JSON null.
//
// packwatch is a monitor, never the protection: the pack's BMS, fuses and
// contactors rule. The limits here mirror where that protection trips so the
// operator sees how near it is.
package pack
