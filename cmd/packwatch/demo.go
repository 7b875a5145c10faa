package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"

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
	var p *config.Profile
	var m *decode.Map
	var err error
	if *profile == "" {
		p, err = config.Parse("buoy-winch.toml (built in)", examples.BuoyWinch)
		if err == nil {
			m, err = decode.Compile(p)
		}
	} else {
		p, m, err = loadProfile(*profile, stderr)
	}
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	opt := sim.Options{Speed: *speed, Seed: 1}
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
	simulator, err := sim.New(m, opt)
	if err != nil {
		fmt.Fprintln(stderr, "demo:", err)
		return exitBad
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))
	s, err := newSession([]*config.Profile{p}, []*decode.Map{m}, "simulated", nil, log)
	if err != nil {
		fmt.Fprintln(stderr, "demo:", err)
		return exitBad
	}
	if f.record != "" {
		rec, err := openRecording(f.record, f.force, f.appendRec, "simulated", []*config.Profile{p}, s.devices)
		if err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
		if s, err = newSession([]*config.Profile{p}, []*decode.Map{m}, "simulated", rec, log); err != nil {
			fmt.Fprintln(stderr, "demo:", err)
			return exitBad
		}
	}
	fmt.Fprintf(stdout, "packwatch demo: SIMULATED data of an invented pack (%s), %.0f× real time; the whole story takes about %s.\n",
		p.Pack.Name, simulator.Speed(), fmtDuration(simulator.StoryLength().Seconds()/simulator.Speed()))
	fmt.Fprintln(stdout, "Press Ctrl-C to stop.")
	err = runSession(ctx, s, &f, "simulated", func(ctx context.Context) error { return simulator.Run(ctx, s) }, stdout)
	if err != nil {
		fmt.Fprintln(stderr, "demo:", err)
		return exitBad
	}
	return exitOK
}

func fmtDuration(sec float64) string {
	if sec < 90 {
		return fmt.Sprintf("%.0f s", sec)
	}
	return fmt.Sprintf("%.0f min", sec/60)
}
