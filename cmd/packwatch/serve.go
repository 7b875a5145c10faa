package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"

	"packwatch/config"
	"packwatch/decode"
)

func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("serve", stderr)
	var profiles listFlag
	fs.Var(&profiles, "profile", "profile `FILE`; repeat for several packs (one profile is one pack)")
	var f serveFlags
	f.register(fs)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch serve --profile FILE [--profile FILE…] [--addr 127.0.0.1:8080] [--record FILE]\n\nShows the packs live from their profiles' sources on a local web page.")
		fs.PrintDefaults()
	}
	if _, err := parseArgs(fs, args); err != nil {
		return exitFor(err)
	}
	if len(profiles) == 0 {
		fmt.Fprintln(stderr, "serve: --profile FILE is required")
		return exitBad
	}
	var profs []*config.Profile
	var maps []*decode.Map
	for _, path := range profiles {
		p, m, err := loadProfile(path, stderr)
		if err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
		profs, maps = append(profs, p), append(maps, m)
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: slog.LevelInfo}))
	s, err := newSession(profs, maps, "live", nil, log)
	if err != nil {
		fmt.Fprintln(stderr, "serve:", err)
		return exitBad
	}
	s.rec, err = openRecording(f.record, f.force, f.appendRec, "live", profs, s.devices)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	if s.rec != nil {
		// the engine was built before the recorder: rebuild with it
		if s, err = newSession(profs, maps, "live", s.rec, log); err != nil {
			fmt.Fprintln(stderr, "serve:", err)
			return exitBad
		}
	}
	w := newReloader(s, log)
	err = runSession(ctx, s, &f, "live", func(ctx context.Context) error {
		go w.run(ctx)
		return s.runDevices(ctx)
	}, stdout)
	w.wait()
	if err != nil {
		fmt.Fprintln(stderr, "serve:", err)
		return exitBad
	}
	return exitOK
}
