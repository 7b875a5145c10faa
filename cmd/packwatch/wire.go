package main

import (
	"context"
	"errors"
	"fmt"
	"io"

	"golang.org/x/sync/errgroup"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

// loadProfile loads and compiles a profile, printing every problem to stderr
// as FILE:LINE:COL: message with its hint.
func loadProfile(path string, stderr io.Writer) (*config.Profile, *decode.Map, error) {
	if path == "" {
		return nil, nil, usagef("--profile FILE is required")
	}
	p, err := config.Load(path)
	if err != nil {
		return nil, nil, err
	}
	for _, w := range p.Warnings {
		fmt.Fprintln(stderr, w.Error())
	}
	m, err := decode.Compile(p)
	if err != nil {
		return nil, nil, err
	}
	return p, m, nil
}

// sourceIndex resolves a source name of the profile.
func sourceIndex(p *config.Profile) func(string) (int, bool) {
	return func(name string) (int, bool) {
		for i, s := range p.Sources {
			if s.Name == name {
				return i, true
			}
		}
		return 0, false
	}
}

// specFor turns a profile's [[source]] into a bus.Spec.
func specFor(p *config.Profile, i int) bus.Spec {
	s := p.Sources[i]
	return bus.Spec{
		Index: uint16(i), Name: s.Name, Kind: s.Kind, Device: s.Device,
		Baud: s.Baud, DataBits: s.DataBits, Parity: s.Parity, StopBits: s.StopBits,
		Bitrate: s.Bitrate, Normal: s.Mode == "normal",
	}
}

// runSources opens the named sources of a profile (all when names is empty)
// and runs them into sink until ctx ends. Every source goroutine is waited for.
func runSources(ctx context.Context, p *config.Profile, names []string, sink bus.Sink) error {
	var srcs []bus.Source
	for i, s := range p.Sources {
		if len(names) > 0 && !contains(names, s.Name) {
			continue
		}
		src, err := bus.Open(specFor(p, i))
		if err != nil {
			return err
		}
		srcs = append(srcs, src)
	}
	if len(srcs) == 0 {
		return usagef("no source named %v in %s", names, p.File)
	}
	g, ctx := errgroup.WithContext(ctx)
	for _, s := range srcs {
		g.Go(func() error { return s.Run(ctx, sink) })
	}
	err := g.Wait()
	if errors.Is(err, context.Canceled) {
		return nil
	}
	return err
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
