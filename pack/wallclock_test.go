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

// TestPackOwnDataTime: each pack is judged on its own data time, so a second
// pack whose clock runs ahead (another simulator, another gateway) does not
// make the first pack's readings stale.
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
	a := canMsg(epoch, 0x4D0, 0xFF, 0x38, 0x12, 0x50, 0x00, 0x01, 0x02, 0x00)
	b := canMsg(epoch+7*sec, 0x4D0, 0xFF, 0x38, 0x12, 0x50, 0x00, 0x01, 0x02, 0x00)
	b.Src = 2
	e.Deliver([]bus.Message{a, b})
	snap := e.Snapshot(time.Unix(0, epoch+7*sec))
	for _, p := range snap.Packs {
		if p.Current == nil {
			t.Errorf("pack %s: current stale although it is the pack's latest reading", p.ID)
		}
	}
}
