package pack

import (
	"testing"
	"time"

	"packwatch/bus"
)

// TestWallClockAges: with live sources, a pack whose sources all fall silent
// must not look fresh: ages grow with the server's clock. Captures and
// replays judge ages on their own data time.
func TestWallClockAges(t *testing.T) {
	for _, wall := range []bool{false, true} {
		e := NewEngine(Options{Mode: "live", WallClockAges: wall})
		if err := e.AddPack("winch", loadMap(t, ""), nil); err != nil {
			t.Fatal(err)
		}
		e.Deliver([]bus.Message{canMsg(epoch, 0x4C0, 0x00, 0x4C, 0x0F, 0x50, 0x0F, 0x55, 0x0F)})
		// ten seconds later on the wall, nothing more arrived
		snap := e.Snapshot(time.Unix(0, epoch+10*sec))
		c := snap.Packs[0].Cells[0]
		want := "ok"
		if wall {
			want = "stale"
		}
		if c.State != want {
			t.Errorf("WallClockAges=%v: cell 1 state %q, want %q", wall, c.State, want)
		}
		if wall && (c.Age == nil || float64(*c.Age) != 10) {
			t.Errorf("age = %v, want 10 s", c.Age)
		}
	}
}

// TestPackOwnDataTime: a second pack whose source delivers seconds of data at
// once (another simulator) does not make the first pack's readings stale,
// but a pack that stays silent for longer than that does turn stale.
func TestPackOwnDataTime(t *testing.T) {
	m := loadMap(t, "")
	e := NewEngine(Options{Mode: "simulated"})
	// pack a on engine sources 0 and 1, pack b on 2 and 3
	if err := e.AddPack("a", m, []int{0, 1, -1, -1}); err != nil {
		t.Fatal(err)
	}
	if err := e.AddPack("b", m, []int{-1, -1, 0, 1}); err != nil {
		t.Fatal(err)
	}
	cur := func(t int64, src uint16) bus.Message {
		m := canMsg(t, 0x4D0, 0xFF, 0x38, 0x12, 0x50, 0x00, 0x01, 0x02, 0x00)
		m.Src = src
		return m
	}
	// each simulator delivers 7 s of data at once; b's batch ends later
	var batchA, batchB []bus.Message
	for t := int64(0); t <= 7*sec; t += 50 * ms {
		batchA = append(batchA, cur(epoch+t, 0))
		batchB = append(batchB, cur(epoch+t+3*sec, 2))
	}
	e.Deliver(batchA)
	e.Deliver(batchB)
	snap := e.Snapshot(time.Unix(0, epoch+10*sec))
	for _, p := range snap.Packs {
		if p.Current == nil {
			t.Errorf("pack %s: current stale although its source is only one delivery behind", p.ID)
		}
	}
	// b goes on in small deliveries for 30 s; a says nothing more
	for t := 10 * sec; t <= 40*sec; t += 50 * ms {
		e.Deliver([]bus.Message{cur(epoch+t, 2)})
	}
	snap = e.Snapshot(time.Unix(0, epoch+40*sec))
	if a := snap.Packs[0]; a.Current != nil {
		t.Errorf("pack a silent for 33 s still shows a current")
	}
}
