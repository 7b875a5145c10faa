package main

import (
	"context"
	"fmt"
	"io"
	"strings"

	"packwatch/config"
)

func runValidate(_ context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("validate", stderr)
	profile := fs.String("profile", "", "profile `FILE` (or give it as the argument)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch validate PROFILE\n\nChecks a profile; prints a summary (exit 0) or every error as FILE:LINE:COL: message (exit 2).")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	path := *profile
	if path == "" && len(pos) == 1 {
		path = pos[0]
	}
	if path == "" || len(pos) > 1 {
		fs.Usage()
		return exitBad
	}
	p, m, err := loadProfile(path, stderr)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	exp := p.Expanded()
	frames := map[uint32]bool{}
	for _, f := range exp.CAN {
		frames[f.ID] = true
	}
	fmt.Fprintf(stdout, "%s: %q, %d cells, %d temperature sensors, %g Ah\n", p.File, p.Pack.Name, p.Pack.Cells, p.Pack.Sensors, p.Pack.CapacityAh)
	fmt.Fprintf(stdout, "sources: %d; CAN IDs: %d; CAN fields after expansion: %d; line patterns: %d\n", len(p.Sources), len(frames), len(exp.CAN), len(exp.Lines))
	fmt.Fprintf(stdout, "bindings covered (%d): %s\n", len(m.Slots()), strings.Join(exp.Bindings, ", "))
	missing := func(kind config.BindKind, n int, what string) {
		var miss []string
		for i := 1; i <= n; i++ {
			b := config.Binding{Kind: kind, Index: i}
			if _, ok := m.SlotIndex(b.String()); !ok {
				miss = append(miss, fmt.Sprint(i))
			}
		}
		if len(miss) > 0 {
			fmt.Fprintf(stdout, "%s with no binding: %s\n", what, strings.Join(miss, ", "))
		}
	}
	missing(config.BindCellVoltage, p.Pack.Cells, "cells")
	missing(config.BindTemp, p.Pack.Sensors, "temperature sensors")
	if _, ok := m.SlotIndex("pack.current"); !ok {
		fmt.Fprintln(stdout, "no pack.current binding: charge is not counted")
	}
	fmt.Fprintf(stdout, "profile hash: %s\n", p.Hash[:16])
	if len(p.Warnings) > 0 {
		fmt.Fprintf(stdout, "%d warning(s), printed above\n", len(p.Warnings))
	}
	return exitOK
}
