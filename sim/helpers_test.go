package sim

import (
	"sync"
	"testing"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

const buoyProfile = "../config/examples/buoy-winch.toml"

func loadMap(t testing.TB, path string) *decode.Map {
	t.Helper()
	p, err := config.Load(path)
	if err != nil {
		t.Fatalf("load %s: %v", path, err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatalf("compile %s: %v", path, err)
	}
	return m
}

// decodeSink decodes everything delivered into Values, as the engine would.
type decodeSink struct {
	mu     sync.Mutex
	m      *decode.Map
	v      *decode.Values
	n      int
	lastT  int64
	status []bus.Status
	bySrc  map[uint16]int
	order  bool // data time never went backwards within a source
	lastBy map[uint16]int64
}

func newDecodeSink(m *decode.Map) *decodeSink {
	return &decodeSink{m: m, v: decode.NewValues(m), bySrc: map[uint16]int{}, order: true, lastBy: map[uint16]int64{}}
}

func (d *decodeSink) Deliver(batch []bus.Message) {
	d.mu.Lock()
	defer d.mu.Unlock()
	for i := range batch {
		msg := &batch[i]
		if msg.T < d.lastBy[msg.Src] {
			d.order = false
		}
		d.lastBy[msg.Src] = msg.T
		d.m.Decode(msg, d.v)
		d.n++
		d.bySrc[msg.Src]++
		d.lastT = msg.T
	}
	d.v.Updated = d.v.Updated[:0]
}

func (d *decodeSink) Status(st bus.Status) {
	d.mu.Lock()
	defer d.mu.Unlock()
	d.status = append(d.status, st)
}

// value reads a slot by binding name.
func (d *decodeSink) value(t testing.TB, name string) (float64, decode.Flag) {
	t.Helper()
	d.mu.Lock()
	defer d.mu.Unlock()
	i, ok := d.m.SlotIndex(name)
	if !ok {
		t.Fatalf("no slot %s", name)
	}
	return d.v.V[i], d.v.Flag[i]
}
