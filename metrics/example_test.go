package metrics_test

import (
	"fmt"
	"net/http/httptest"
	"strings"
	"time"

	"packwatch/metrics"
	"packwatch/pack"
)

// observingEngine is how a program wires the handler to the hub without
// changing the hub: the engine the server ticks hands every snapshot it
// builds to Observe as well.
type observingEngine struct {
	*pack.Engine
	m *metrics.Handler
}

func (o observingEngine) Snapshot(serverTime time.Time) *pack.Snapshot {
	s := o.Engine.Snapshot(serverTime)
	o.m.Observe(s)
	return s
}

func Example() {
	h := metrics.NewHandler(metrics.Options{Version: "1.0"})
	eng := observingEngine{pack.NewEngine(pack.Options{}), h}
	eng.Snapshot(time.Now()) // what the hub does at every tick

	// GET /metrics (mounted behind the dashboard's token check).
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("GET", "/metrics", nil))
	for line := range strings.SplitSeq(rec.Body.String(), "\n") {
		if !strings.HasPrefix(line, "#") && line != "" {
			fmt.Println(line)
		}
	}
	// Output:
	// packwatch_info{mode="live",version="1.0"} 1
	// packwatch_snapshots_total 1
}
