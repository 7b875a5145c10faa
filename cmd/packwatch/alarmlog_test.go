package main

import (
	"path/filepath"
	"strings"
	"testing"
	"time"

	"packwatch/pack"
	"packwatch/record"
)

func TestAlarmLog(t *testing.T) {
	db := filepath.Join(t.TempDir(), "a.db")
	w, err := record.Create(db, record.Meta{Tool: "packwatch", Start: time.Unix(100, 0)}, record.Options{})
	if err != nil {
		t.Fatal(err)
	}
	l := newAlarmLog(w)
	v, m := pack.Num(4.27), pack.Num(0.03)
	snap := func(dataT float64, acked bool, margin string) *pack.Snapshot {
		return &pack.Snapshot{DataT: pack.Num(dataT), Packs: []pack.PackSnapshot{{
			ID:      "p1",
			Alarms:  []pack.AlarmSnap{{ID: 1, Label: "Cell high", Subject: "cell 7", Level: "trip", Since: 101, Value: &v, Active: true, Acked: acked}},
			Margins: []pack.Margin{{Limit: "cell_low", Label: "Cell low", Subject: "cell 3", Unit: "V", Margin: &m, State: margin}},
		}}}
	}
	l.observe(snap(101.5, false, "ok"))
	l.observe(snap(102, false, "warn"))
	l.observe(snap(102.5, false, "warn")) // nothing new
	l.observe(snap(103, true, "warn"))
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := record.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	evs, err := r.Events()
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range evs {
		got = append(got, e.Kind+"@"+time.Unix(0, e.T).UTC().Format("05.0")+" "+e.Text)
	}
	want := []string{
		"trip@41.0 p1: trip Cell high (cell 7) at 4.27",
		"warn@42.0 p1: warning, Cell low (cell 3), margin 0.03 V",
		"ack@43.0 p1: acknowledged trip Cell high (cell 7)",
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("events:\n%s\nwant:\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}
