package check

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"time"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/record"
)

// SourceNames lists a profile's source names by index.
func SourceNames(p *config.Profile) []string {
	out := make([]string, len(p.Sources))
	for i, s := range p.Sources {
		out[i] = s.Name
	}
	return out
}

// RunCapture feeds a capture file ("-" reads standard input) through a
// Collector into eng and returns the checked window: the whole capture, or
// its last `last` of data time (the engine still sees everything before,
// which builds counted charge and trip timers). Malformed lines are counted,
// reported to onErr (if set) and skipped.
func RunCapture(ctx context.Context, eng Engine, packID string, p *config.Profile, path string, last time.Duration, onErr func(*bus.CaptureError)) (Window, Raw, DataInfo, error) {
	info := DataInfo{Mode: ModeCapture, Source: "capture " + path}
	var data []byte
	var err error
	if path == "-" {
		data, err = io.ReadAll(os.Stdin)
	} else {
		data, err = os.ReadFile(path)
	}
	if err != nil {
		return Window{}, Raw{}, info, fmt.Errorf("read capture: %w", err)
	}
	info.Simulated = simulatedCapture(data)
	names := SourceNames(p)
	resolve := func(name string) (int, bool) {
		for i, n := range names {
			if n == name {
				return i, true
			}
		}
		return 0, false
	}
	var from int64
	if last > 0 {
		cr := bus.NewCaptureReader(bytes.NewReader(data), resolve)
		first, end, seen := int64(0), int64(0), false
		for cr.Scan() {
			t := cr.Message().T
			if !seen || t > end {
				end = t
			}
			if !seen || t < first {
				first = t
			}
			seen = true
		}
		if err := cr.Err(); err != nil {
			return Window{}, Raw{}, info, fmt.Errorf("read capture %s: %w", path, err)
		}
		if seen {
			from = clampFrom(&info, first, end, last)
		}
	}
	col := NewCollector(eng, packID, names, from, 0)
	cr := bus.NewCaptureReader(bytes.NewReader(data), resolve)
	cr.OnError = onErr
	batch := make([]bus.Message, 0, 256)
	for cr.Scan() {
		batch = append(batch, cr.Message())
		if len(batch) == cap(batch) {
			col.Deliver(batch)
			batch = batch[:0]
			if err := ctx.Err(); err != nil {
				return Window{}, Raw{}, info, err
			}
		}
	}
	col.Deliver(batch)
	if err := cr.Err(); err != nil {
		return Window{}, Raw{}, info, fmt.Errorf("read capture %s: %w", path, err)
	}
	info.Malformed = cr.Malformed
	w, raw := col.Finish()
	return w, raw, info, nil
}

// RecordingSources maps a recording's source indexes to the profile's
// (-1 where the profile has no source of that name), for
// pack.Engine.AddPack, and gives the recording's source names by index.
func RecordingSources(meta record.Meta, p *config.Profile) (srcMap []int, names []string) {
	n := 0
	for _, s := range meta.Sources {
		if int(s.Index)+1 > n {
			n = int(s.Index) + 1
		}
	}
	srcMap = make([]int, n)
	names = make([]string, n)
	for i := range srcMap {
		srcMap[i] = -1
	}
	for _, s := range meta.Sources {
		names[s.Index] = s.Name
		for j, ps := range p.Sources {
			if ps.Name == s.Name {
				srcMap[s.Index] = j
			}
		}
	}
	return srcMap, names
}

// RunRecording replays a recording into eng (whose pack must be added with
// the map from RecordingSources) and returns the checked window: the whole
// recording or its last `last` of data time. When the recording's last
// profile version is not p, the data's source says so.
func RunRecording(ctx context.Context, eng Engine, packID string, rec *record.Reader, names []string, last time.Duration, p *config.Profile) (Window, Raw, DataInfo, error) {
	meta := rec.Meta()
	info := DataInfo{Mode: ModeReplay, Source: "recording " + rec.Path(), Simulated: meta.Mode == "simulated"}
	if vs, err := rec.Profiles(); err == nil && len(vs) > 0 && p != nil && vs[len(vs)-1].Hash != p.Hash {
		info.Source += fmt.Sprintf(" (recorded with profile %q sha256 %s, checked with this profile)", vs[len(vs)-1].Name, short(vs[len(vs)-1].Hash))
	}
	first, end, ok, err := rec.Span()
	if err != nil {
		return Window{}, Raw{}, info, err
	}
	if !ok {
		w, raw := NewCollector(eng, packID, names, 0, 0).Finish()
		return w, raw, info, nil
	}
	var from int64
	if last > 0 {
		from = clampFrom(&info, first, end, last)
	}
	col := NewCollector(eng, packID, names, from, 0)
	err = rec.Scan(ctx, first, end+1, func(batch []bus.Message) error {
		col.Deliver(batch)
		return ctx.Err()
	})
	if err != nil {
		return Window{}, Raw{}, info, fmt.Errorf("replay %s: %w", rec.Path(), err)
	}
	w, raw := col.Finish()
	return w, raw, info, nil
}

// simulatedCapture reports a capture whose leading comment lines say it was
// simulated ("# simulated ...", as packwatch simulate writes).
func simulatedCapture(data []byte) bool {
	for len(data) > 0 && data[0] == '#' {
		line := data
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			line, data = data[:i], data[i+1:]
		} else {
			data = nil
		}
		if bytes.HasPrefix(bytes.TrimSpace(bytes.TrimPrefix(line, []byte("#"))), []byte("simulated")) {
			return true
		}
	}
	return false
}

// EventRecord is a check result found in a recording.
type EventRecord struct {
	T      int64   // data time of the event, ns
	Text   string  // the event's one-line text
	Record *Record // nil when the event's JSON is not a record
	// Err says why the record is missing or does not match its hash.
	Err error
}

// RecordedChecks returns the check results a session recorded (events of
// kind "check"), each verified against its hash: what a report of the
// session lists.
func RecordedChecks(rec *record.Reader) ([]EventRecord, error) {
	evs, err := rec.Events()
	if err != nil {
		return nil, err
	}
	var out []EventRecord
	for _, e := range evs {
		if e.Kind != record.EventCheck {
			continue
		}
		er := EventRecord{T: e.T, Text: e.Text}
		er.Record, er.Err = ParseRecord([]byte(e.JSON))
		if er.Err == nil {
			er.Err = er.Record.VerifyHash()
		}
		out = append(out, er)
	}
	return out, nil
}

// clampFrom is the start of the last `last` of data ending at end, no
// earlier than the data's first message; the source notes data shorter
// than asked for.
func clampFrom(info *DataInfo, first, end int64, last time.Duration) int64 {
	from := end - int64(last)
	if from < first {
		info.Source += fmt.Sprintf(" (only %.1f s of data, less than the %s asked for)", float64(end-first)/1e9, last)
		return first
	}
	return from
}
