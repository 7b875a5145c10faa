// Package server is packwatch's dashboard: an HTTP server that serves the
// page (embedded from package web), a websocket stream and a small REST API.
//
// Data flow: a hub ticks on the wall clock (default 10 Hz). Each tick it asks
// the engine for one Snapshot, marshals it once, wraps it in one
// websocket.PreparedMessage and hands it to every client's one-slot mailbox,
// replacing whatever that client had not yet sent. Each client has its own
// writer goroutine with a write deadline and ping/pong, so a slow or dead
// client is dropped and never slows the hub, another client or the bus
// reader (the engine only sees one Snapshot call per tick). REST handlers
// (/api/state) serve the same bytes the hub marshalled.
//
// Messages on /ws are JSON objects {"type": ..., "data": ...}:
//
//	hello     once, first: mode, tick, whether replay controls and a bus view exist
//	history   once, second: the last 10 minutes of chart series per pack
//	snapshot  every tick: the pack.Snapshot
//	bus       1–2 Hz, only to clients that sent {"type":"subscribe","bus":true}
//
// Routes: / (the page), /static/ (embedded assets), /ws, GET /api/state,
// /api/profile, /api/bus, /healthz, POST /api/packs/{pack}/alarms/{id}/ack,
// POST /api/replay/{pause,play,seek,speed} when a Replay is set, and any
// Options.Handlers (e.g. /metrics, /api/check/*). Options.OnSnapshot sees
// every snapshot the hub takes.
//
// Security: loopback by default; any other listen address requires a token
// (128-bit random, constant-time compare; accepted as ?token=, a cookie or
// an Authorization: Bearer header, and kept in an HttpOnly SameSite=Lax
// cookie after the first visit). The Host header is checked on every request
// (DNS rebinding), Origin on websockets and on every request that is not GET
// or HEAD. No route writes to a bus or takes a file path from the client.
package server
