package main

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"strconv"
	"sync"
	"time"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
)

func runDecode(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("decode", stderr)
	profile := fs.String("profile", "", "profile `FILE`")
	input := fs.String("input", "", "capture `FILE` to decode (- for standard input)")
	source := fs.String("source", "", "decode live from this profile source `NAME` instead of a capture")
	dur := fs.Duration("for", 0, "with --source: stop after this `DURATION` (default: until Ctrl-C)")
	state := fs.Bool("state", false, "after the updates, print the final pack state as one JSON object")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch decode --profile FILE (--input CAPTURE | --source NAME [--for D]) [--state]\n\nWrites one JSON object per decoded value: {\"t\":SECONDS,\"bind\":\"cell[3].voltage\",\"value\":3.912}.")
		fs.PrintDefaults()
	}
	if _, err := parseArgs(fs, args); err != nil {
		return exitFor(err)
	}
	if (*input == "") == (*source == "") {
		fmt.Fprintln(stderr, "decode: give --input CAPTURE or --source NAME")
		fs.Usage()
		return exitBad
	}
	p, m, err := loadProfile(*profile, stderr)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	out := bufio.NewWriterSize(stdout, 64*1024)
	defer out.Flush()
	d := newUpdateWriter(m, out)
	var eng *pack.Engine
	if *state {
		eng = pack.NewEngine(pack.Options{Mode: "live"})
		if err := eng.AddPack(packID(p), m, nil); err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
	}
	if *input != "" {
		d.start, err = decodeCapture(*input, p, d, eng, stderr)
		if err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
	} else {
		sink := &liveDecodeSink{d: d, eng: eng, stderr: stderr, names: p.Sources}
		if *dur > 0 {
			var cancel context.CancelFunc
			ctx, cancel = context.WithTimeout(ctx, *dur)
			defer cancel()
		}
		d.start = time.Now().UnixNano()
		if err := runSources(ctx, p, []string{*source}, sink); err != nil {
			fmt.Fprintln(stderr, "decode:", err)
			return exitBad
		}
	}
	if eng != nil {
		snap := eng.Snapshot(time.Now())
		b, err := json.Marshal(snap.Packs[0])
		if err != nil {
			fmt.Fprintln(stderr, "decode: state:", err)
			return exitBad
		}
		out.Write(b)
		out.WriteByte('\n')
	}
	return exitOK
}

// decodeCapture reads a capture whole and decodes it in order.
func decodeCapture(path string, p *config.Profile, d *updateWriter, eng *pack.Engine, stderr io.Writer) (int64, error) {
	var r io.Reader = os.Stdin
	if path != "-" {
		f, err := os.Open(path)
		if err != nil {
			return 0, fmt.Errorf("decode: %w", err)
		}
		defer f.Close()
		r = f
	}
	cr := bus.NewCaptureReader(r, sourceIndex(p))
	cr.OnError = func(e *bus.CaptureError) { fmt.Fprintf(stderr, "%s: %v\n", path, e) }
	batch := make([]bus.Message, 0, 256)
	flush := func() {
		if eng != nil {
			eng.Deliver(batch)
		}
		batch = batch[:0]
	}
	for cr.Scan() {
		m := cr.Message()
		d.start = cr.Start()
		d.write(&m)
		batch = append(batch, m)
		if len(batch) == cap(batch) {
			flush()
		}
	}
	flush()
	if cr.Malformed > 0 {
		fmt.Fprintf(stderr, "%s: %d malformed line(s) skipped\n", path, cr.Malformed)
	}
	return cr.Start(), cr.Err()
}

// updateWriter writes one JSON line per decoded update.
type updateWriter struct {
	m     *decode.Map
	v     *decode.Values
	w     *bufio.Writer
	start int64
	buf   []byte
	keep  []bool // slots to write; nil writes all
}

func newUpdateWriter(m *decode.Map, w *bufio.Writer) *updateWriter {
	return &updateWriter{m: m, v: decode.NewValues(m), w: w}
}

func (d *updateWriter) write(msg *bus.Message) {
	d.v.Updated = d.v.Updated[:0]
	d.m.Decode(msg, d.v)
	slots := d.m.Slots()
	for _, s := range d.v.Updated {
		if d.keep != nil && !d.keep[s] {
			continue
		}
		sl := &slots[s]
		b := d.buf[:0]
		b = append(b, `{"t":`...)
		b = strconv.AppendFloat(b, float64(msg.T-d.start)/1e9, 'f', -1, 64)
		b = append(b, `,"bind":`...)
		b = strconv.AppendQuote(b, sl.Name)
		b = append(b, `,"value":`...)
		switch d.v.Flag[s] {
		case decode.FlagOK:
			b = appendValue(b, sl, d.v.V[s], d.v.Raw[s])
		case decode.FlagInvalid:
			b = append(b, `null,"state":"invalid"`...)
		case decode.FlagFault:
			b = append(b, `null,"state":"fault","implausible":`...)
			b = strconv.AppendFloat(b, d.v.V[s], 'g', -1, 64)
		}
		b = append(b, "}\n"...)
		d.w.Write(b)
		d.buf = b
	}
}

// appendValue writes a value as JSON: an enum gives its name (unknown codes
// the number), a flag true or false, a number in its shortest form.
func appendValue(b []byte, sl *decode.Slot, v float64, raw int64) []byte {
	if sl.Enum != nil {
		if name, ok := sl.Enum[raw]; ok {
			return strconv.AppendQuote(b, name)
		}
	}
	if sl.Bind.Bool() {
		return strconv.AppendBool(b, v != 0)
	}
	// round away binary noise from scaling (0.001 × 3912 = 3.9120000000000004)
	return strconv.AppendFloat(b, roundSig(v), 'g', -1, 64)
}

func roundSig(v float64) float64 {
	f, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 12, 64), 64)
	return f
}

// liveDecodeSink decodes live batches as they come.
type liveDecodeSink struct {
	mu     sync.Mutex
	d      *updateWriter
	eng    *pack.Engine
	stderr io.Writer
	names  []config.Source
}

func (s *liveDecodeSink) Deliver(batch []bus.Message) {
	s.mu.Lock()
	for i := range batch {
		s.d.write(&batch[i])
	}
	s.d.w.Flush()
	s.mu.Unlock()
	if s.eng != nil {
		s.eng.Deliver(batch)
	}
}

func (s *liveDecodeSink) Status(st bus.Status) {
	name := "?"
	if int(st.Src) < len(s.names) {
		name = s.names[st.Src].Name
	}
	fmt.Fprintf(s.stderr, "source %s: %s %s\n", name, st.State, st.Reason)
	if s.eng != nil {
		s.eng.Status(st)
	}
}

// packID is a short key for a pack in the engine.
func packID(p *config.Profile) string {
	if p.Pack.Serial != "" {
		return p.Pack.Serial
	}
	return "pack1"
}
