package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"log/slog"
	"strings"

	"golang.org/x/sync/errgroup"

	"packwatch/bus"

	"packwatch/config"
	"packwatch/config/examples"
	"packwatch/decode"
	"packwatch/sim"
)

func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("demo", stderr)
	var f serveFlags
	f.register(fs)
	speed := fs.Float64("speed", 0, "simulated seconds per real second (default: the whole story in about 10 minutes)")
	profile := fs.String("profile", "", "simulate this profile `FILE` instead of the built-in buoy winch pack")
	npacks := fs.Int("packs", 1, "simulate `N` built-in packs side by side, each on its own bus (a fleet demo)")
	scenario := fs.String("scenario", "", "scenario `NAME` or FILE (default: buoy-winch for the built-in pack, else generic)")
	var faults listFlag
	fs.Var(&faults, "fault", "put a `FAULT` into the data (repeatable): cell-high, weak-cell, sensor-stop, hot-sensor, silent, contactor-stuck, garbage, fault-flag, low-soc")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch demo [--addr 127.0.0.1:8080] [--speed N] [--record FILE]\n\nRuns a simulated pack through the real decoder and shows it on the dashboard. No hardware needed.")
		fs.PrintDefaults()
	}
	if _, err := parseArgs(fs, args); err != nil {
		return exitFor(err)
	}
	if *npacks < 1 || *npacks > 26 || (*npacks > 1 && *profile != "") {
		fmt.Fprintln(stderr, "demo: --packs takes 1 to 26, with the built-in pack only")
		return exitBad
	}
	var profs []*config.Profile
	var maps []*decode.Map
	if *profile == "" {
		for i := range *npacks {
			p, m, err := builtinPack(i, *npacks)
			if err != nil {
				fmt.Fprintln(stderr, err)
				return exitBad
			}
			profs, maps = append(profs, p), append(maps, m)
		}
	} else {
		p, m, err := loadProfile(*profile, stderr)
		if err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
		profs, maps = []*config.Profile{p}, []*decode.Map{m}
	}
	p := profs[0]
	var err error
	opt := sim.Options{Speed: *speed}
	switch {
	case *scenario != "":
		opt.Scenario, err = sim.LoadScenario(*scenario, p)
	case *profile == "":
		opt.Scenario = sim.BuoyWinchScenario()
	}
	if err != nil {
		fmt.Fprintln(stderr, "demo:", err)
		return exitBad
	}
	for _, s := range faults {
		ft, err := sim.ParseFault(s)
		if err != nil {
			fmt.Fprintln(stderr, "demo:", err)
			return exitBad
		}
		opt.Faults = append(opt.Faults, ft)
	}
	var sims []*sim.Sim
	for i, m := range maps {
		o := opt
		o.Seed = uint64(i + 1)
		simulator, err := sim.New(m, o)
		if err != nil {
			fmt.Fprintln(stderr, "demo:", err)
			return exitBad
		}
		sims = append(sims, simulator)
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))
	s, err := newSession(profs, maps, "simulated", nil, log)
	if err != nil {
		fmt.Fprintln(stderr, "demo:", err)
		return exitBad
	}
	if f.record != "" {
		rec, err := openRecording(f.record, f.force, f.appendRec, "simulated", profs, s.devices)
		if err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
		if s, err = newSession(profs, maps, "simulated", rec, log); err != nil {
			fmt.Fprintln(stderr, "demo:", err)
			return exitBad
		}
	}
	sim0 := sims[0]
	fmt.Fprintf(stdout, "packwatch demo: SIMULATED data of %d invented pack(s) (%s), %.0f× real time; the whole story takes about %s.\n",
		len(sims), p.Pack.Name, sim0.Speed(), fmtDuration(sim0.StoryLength().Seconds()/sim0.Speed()))
	fmt.Fprintln(stdout, "Press Ctrl-C to stop.")
	err = runSession(ctx, s, &f, "simulated", func(ctx context.Context) error {
		g, ctx := errgroup.WithContext(ctx)
		for i, simulator := range sims {
			sink := newSrcRemap(s, s.packs[i].srcMap)
			g.Go(func() error { return simulator.Run(ctx, sink) })
		}
		return g.Wait()
	}, stdout)
	if err != nil {
		fmt.Fprintln(stderr, "demo:", err)
		return exitBad
	}
	return exitOK
}

// builtinPack is pack i of n of the built-in demo: one pack is the example
// profile as shipped; several get their own names and buses (pod-a on can0
// and /dev/ttyUSB0, pod-b on can1 and /dev/ttyUSB1, …).
func builtinPack(i, n int) (*config.Profile, *decode.Map, error) {
	text, file := examples.BuoyWinch, "buoy-winch.toml (built in)"
	if n > 1 {
		letter := string(rune('a' + i))
		text = bytes.Replace(text, []byte(`device = "can0"`), []byte(fmt.Sprintf(`device = "can%d"`, i)), 1)
		text = bytes.Replace(text, []byte(`"/dev/ttyUSB0"`), []byte(fmt.Sprintf(`"/dev/ttyUSB%d"`, i)), 1)
		text = bytes.Replace(text, []byte(`name = "Buoy winch pack"`), []byte(`name = "Buoy winch pack `+strings.ToUpper(letter)+`"`), 1)
		file = "pod-" + letter + ".toml (built in)"
	}
	p, err := config.Parse(file, text)
	if err != nil {
		return nil, nil, err
	}
	m, err := decode.Compile(p)
	return p, m, err
}

// srcRemap turns a pack's own source indexes into the session's device
// indexes, for a simulator that speaks one profile among several.
type srcRemap struct {
	sink bus.Sink
	to   []uint16
	buf  []bus.Message
}

func newSrcRemap(sink bus.Sink, srcMap []int) *srcRemap {
	r := &srcRemap{sink: sink}
	for dev, src := range srcMap {
		if src < 0 {
			continue
		}
		for len(r.to) <= src {
			r.to = append(r.to, 0)
		}
		r.to[src] = uint16(dev)
	}
	return r
}

// Deliver implements bus.Sink.
func (r *srcRemap) Deliver(batch []bus.Message) {
	r.buf = append(r.buf[:0], batch...)
	for i := range r.buf {
		if int(r.buf[i].Src) < len(r.to) {
			r.buf[i].Src = r.to[r.buf[i].Src]
		}
	}
	r.sink.Deliver(r.buf)
}

// Status implements bus.Sink.
func (r *srcRemap) Status(st bus.Status) {
	if int(st.Src) < len(r.to) {
		st.Src = r.to[st.Src]
	}
	r.sink.Status(st)
}

func fmtDuration(sec float64) string {
	if sec < 90 {
		return fmt.Sprintf("%.0f s", sec)
	}
	return fmt.Sprintf("%.0f min", sec/60)
}
