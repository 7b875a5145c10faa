// Package record writes and reads packwatch session recordings: one SQLite
// file per session holding the session's metadata, every profile version with
// the data time it took effect, the raw messages of every source, the events
// of the session and a table of min / max / last per binding per second.
//
// In the data flow the pack engine hands each batch it receives to
// Writer.Write, which encodes it into the current block in the caller's
// goroutine and never blocks: a block is sealed at 4,096 messages or on the
// writer's 250 ms tick, queued, and committed by one writer goroutine that
// writes all queued blocks in one transaction. A full queue drops a block,
// counts it and notes an overrun event; a disk error stops the recording
// (Writer.Err) while the live path goes on.
//
// Reader opens a recording (refusing a foreign or corrupt file with a clear
// error), notes a recovery when the previous writer did not close, and reads
// the raw messages back with Scan. Replay turns a recording back into a bus
// source, paced on data time with an injectable clock.
//
// The file layout is documented in SCHEMA.md so that users can query a
// recording with the sqlite3 shell; the block codec is in codec.go.
package record
