// Package metrics exposes the packs' state to Prometheus: /metrics in the
// Prometheus text format, or OpenMetrics when the scraper asks for it.
//
// Its place in the data flow is at the end, beside the page and the REST
// API: the hub takes one pack.Snapshot per tick and hands it to
// Handler.Observe; a scrape builds its metrics from the latest observed
// snapshot, so /metrics and /api/state read the same state. Nothing here
// reads the bus or the engine's internals, and nothing here starts a
// goroutine.
//
// A scrape every 15 s sees one snapshot in 150. Two things make up for that:
//
//   - The lowest and highest cell voltage and the lowest and highest pack
//     current are folded in at every observed snapshot and reported as the
//     extremes since the same scraper's previous scrape, so a 2 s sag
//     between two scrapes is still seen. Their resolution is the hub tick
//     (100 ms by default): a dip shorter than a tick may be missed. Each
//     scraper (remote host and User-Agent) has its own window, so a person
//     running curl does not empty Prometheus's window.
//   - Trips and sensor faults are counted at every observed snapshot, from
//     the alarm ids the engine hands out, so a trip that cleared between
//     two scrapes still moves its counter.
//
// Series are built afresh at every scrape by one collector (const metrics),
// so a reading that is stale, missing or faulty is simply not exposed: a
// silent source's values disappear instead of freezing at their last value,
// and Prometheus marks them stale.
//
// Units and names follow Prometheus's conventions: base units (volts,
// amperes, celsius, seconds, coulombs, joules), ratios 0–1, counters ending
// in _total; labels pack, cell, sensor and source. Charge is in coulombs
// (1 Ah = 3600 C) and energy in joules (1 Wh = 3600 J).
//
// packwatch is a monitor, never the protection: alerts built on these
// metrics come late or not at all when packwatch, the network or Prometheus
// fails. The pack's BMS, fuses and contactors protect the pack.
package metrics
