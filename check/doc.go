// Package check is the pre-flight check: one answer a field crew can trust
// and show afterwards, whether a pack is fit to go and, if not, why.
//
// A check watches a pack over a window of data time (live sources, a
// capture, or a recording) through a pack.Engine. A Collector samples the
// engine's snapshots once per second of data time and keeps the raw
// messages of the window; Evaluate turns the samples and the profile's
// [check] settings (Resolve, defaults taken from the limits) into one
// RuleResult per rule: PASS, FAIL or NO DATA, with the measured value, the
// requirement and the reason in plain words. Evaluate is a pure function of
// its inputs, so the same window gives the same answer live, from a capture
// and from a replay.
//
// NewRecord makes a Record of the result: time, operator, pack serial,
// profile hash, mode (live, replay, capture, simulated), every rule, the
// manual checklist, the raw messages of the window and what changed since
// the pack's previous check. A History (SQLite) stores records in a hash
// chain, so that a removed or edited record shows (History.Verify). Handler
// serves the dashboard's check panel.
//
// The check is an aid. The pack's own protection (BMS, fuses, contactors),
// the operator's procedures and the aircraft or vehicle documentation rule.
package check
