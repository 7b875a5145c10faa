// Package bus reads the devices a pack talks through and turns what they say
// into timestamped messages for the engine.
//
// A Source (opened with Open from a Spec) runs in its own goroutine until its
// context is cancelled. It connects to its device, reads in batches (it waits
// a few milliseconds after each read so that one wake-up carries many frames),
// stamps each batch with its Clock and hands it to a Sink with Deliver. It
// reports connection changes with Sink.Status, and when a device disappears it
// retries with backoff and, once it is back, delivers a KindGap message so
// that nothing downstream integrates across the hole. A LiveClock reports
// suspends and clock steps the same way.
//
// Every message of one read carries the same T, the data time at which the
// read returned: with the default 5 ms batch wait that is within a few
// milliseconds of arrival. (An slcan adapter's own millisecond timestamps are
// parsed and counted but not used for T.)
//
// One adapter a file: socketcan (Linux only), serial-can (the ASCII serial
// line CAN protocol of the Linux slcan driver), serial-text (a console that
// prints lines) and tcp-can (the 16-byte SocketCAN frame layout over TCP). The
// parsers they use are exported for the simulator and tools: ParseSLCAN,
// AppendSLCAN, LineSplitter, LineScanner, and FrameWriter for the 16-byte
// layout. ListPorts and ListCANInterfaces describe what is plugged in.
//
// packwatch never transmits on a CAN bus: a socketcan source never writes to
// its socket, and a serial-can source writes only the adapter's own commands
// (close, bitrate, open), opening it listen-only unless the profile asks for
// normal mode.
package bus
