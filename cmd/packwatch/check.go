package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"packwatch/bus"
	"packwatch/check"
	"packwatch/config"
	"packwatch/pack"
	"packwatch/record"
)

func runCheck(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("check", stderr)
	profile := fs.String("profile", "", "profile `FILE`")
	dur := fs.Duration("for", 10*time.Second, "watch live sources this `DURATION`; with --input or --replay check only the last DURATION of the data")
	input := fs.String("input", "", "check a capture `FILE` instead of the live sources (- for standard input)")
	replay := fs.String("replay", "", "check a `RECORDING` instead of the live sources")
	out := fs.String("o", "", "also write the result to `FILE`: .html (printable) or .json")
	asJSON := fs.Bool("json", false, "print the result as JSON instead of the table")
	operator := fs.String("operator", "", "who runs the check (`NAME`)")
	packIDFlag := fs.String("pack-id", "", "the pack's serial when the BMS does not report pack.serial (`ID`)")
	note := fs.String("note", "", "a note kept with the result (`TEXT`)")
	var confirm listFlag
	fs.Var(&confirm, "confirm", "confirm checklist item `N` (from 1, repeatable) or \"all\", after checking it by hand")
	history := fs.String("history", "", "check history `FILE` (default $"+check.HistoryEnv+", else checks.db in the user's config dir)")
	verify := fs.Bool("verify", false, "verify the history's hash chain and exit: 0 intact, 1 altered")
	list := fs.Bool("list", false, "list the history (of --pack-id's pack, or all) and exit")
	show := fs.String("show", "", "print the stored result whose hash starts with `HASH` (with -o or --json) and exit")
	fs.Usage = func() {
		fmt.Fprintln(stderr, `Usage: packwatch check --profile FILE [--for 10s] [--input CAPTURE | --replay RECORDING]
                       [-o OUT.html|OUT.json] [--json] [--operator NAME] [--pack-id ID] [--confirm N]...
       packwatch check --verify | --list [--pack-id ID] | --show HASH

Checks whether a pack is fit to go and prints each rule with its measured value,
its requirement, PASS / FAIL / NO DATA and the reason. Every result is saved in
the check history, chained by hash to the one before.
Exit codes: 0 go, 1 no-go, 2 could not check (no data, bad profile or flags).

The check is an aid: the pack's own protection, the operator's procedures and the
aircraft or vehicle documentation rule.`)
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) > 0 {
		fmt.Fprintf(stderr, "check: unexpected argument %q\n", pos[0])
		return exitBad
	}
	forSet := false
	fs.Visit(func(f *flag.Flag) { forSet = forSet || f.Name == "for" })

	hpath := *history
	if hpath == "" {
		if hpath, err = check.DefaultHistoryPath(); err != nil {
			fmt.Fprintln(stderr, err)
			return exitBad
		}
	}
	hist, err := check.OpenHistory(hpath)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	defer hist.Close()

	switch {
	case *verify:
		return verifyHistory(ctx, hist, stdout, stderr)
	case *list:
		return listHistory(ctx, hist, *packIDFlag, *asJSON, stdout, stderr)
	case *show != "":
		r, err := hist.Get(ctx, *show)
		if err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		if err := r.VerifyHash(); err != nil {
			fmt.Fprintln(stderr, "check: WARNING:", err)
		}
		if code := writeOutputs(r, *out, *asJSON, stdout, stderr); code != exitOK {
			return code
		}
		return verdictCode(r.Verdict)
	}

	if *input != "" && *replay != "" {
		fmt.Fprintln(stderr, "check: give --input or --replay, not both")
		return exitBad
	}
	if *dur <= 0 {
		fmt.Fprintln(stderr, "check: --for must be positive")
		return exitBad
	}
	p, m, err := loadProfile(*profile, stderr)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	settings := check.Resolve(p)
	confirmed, err := parseConfirm(confirm, len(settings.Manual))
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	id := packID(p)
	eng := pack.NewEngine(pack.Options{Mode: "live"})
	last := time.Duration(0)
	if forSet {
		last = *dur
	}

	var (
		w    check.Window
		raw  check.Raw
		info check.DataInfo
	)
	switch {
	case *input != "":
		if err := eng.AddPack(id, m, nil); err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		w, raw, info, err = check.RunCapture(ctx, eng, id, p, *input, last, func(e *bus.CaptureError) {
			fmt.Fprintf(stderr, "%s: %v\n", *input, e)
		})
	case *replay != "":
		var rec *record.Reader
		rec, err = record.Open(*replay)
		if err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		defer rec.Close()
		srcMap, names := check.RecordingSources(rec.Meta(), p)
		if err := eng.AddPack(id, m, srcMap); err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		w, raw, info, err = check.RunRecording(ctx, eng, id, rec, names, last, p)
	default:
		if err := eng.AddPack(id, m, nil); err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		w, raw, info, err = checkLive(ctx, eng, id, p, *dur, stderr)
	}
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	if info.Malformed > 0 {
		fmt.Fprintf(stderr, "check: %d malformed line(s) skipped\n", info.Malformed)
	}

	rec := check.NewRecord(w, raw, settings, check.Inputs{Profile: p, PackID: id, Operator: *operator, Note: *note,
		PackSerial: *packIDFlag, Data: info, Confirmed: confirmed, Now: time.Now()})
	if *packIDFlag != "" && rec.Pack.SerialFrom == "bms" && rec.Pack.Serial != *packIDFlag {
		fmt.Fprintf(stderr, "check: WARNING: the BMS reports serial %s, not --pack-id %s: the record keeps the BMS's\n", rec.Pack.Serial, *packIDFlag)
	}
	prev, err := hist.Last(ctx, rec.Pack.Key)
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	rec.Compare(prev)
	if err := hist.Save(ctx, rec); err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	if code := writeOutputs(rec, *out, *asJSON, stdout, stderr); code != exitOK {
		return code
	}
	if !*asJSON {
		fmt.Fprintf(stdout, "Saved in %s\n", hist.Path())
	}
	return verdictCode(rec.Verdict)
}

// checkLive watches the profile's live sources for d.
func checkLive(ctx context.Context, eng *pack.Engine, id string, p *config.Profile, d time.Duration, stderr io.Writer) (check.Window, check.Raw, check.DataInfo, error) {
	names := check.SourceNames(p)
	info := check.DataInfo{Mode: check.ModeLive, Source: "live sources " + strings.Join(names, ", ")}
	start := time.Now()
	col := check.NewCollector(eng, id, names, start.UnixNano(), start.Add(d).UnixNano())
	sink := &statusLogger{Collector: col, names: names, stderr: stderr}
	lctx, cancel := context.WithTimeout(ctx, d)
	defer cancel()
	fmt.Fprintf(stderr, "check: watching %s for %s\n", strings.Join(names, ", "), d)
	err := runSources(lctx, p, nil, sink)
	if ctx.Err() != nil {
		return check.Window{}, check.Raw{}, info, fmt.Errorf("interrupted: %w", ctx.Err())
	}
	if err != nil && !errors.Is(err, context.DeadlineExceeded) {
		return check.Window{}, check.Raw{}, info, err
	}
	w, raw := col.Finish()
	return w, raw, info, nil
}

// statusLogger reports source state changes on stderr.
type statusLogger struct {
	*check.Collector
	names  []string
	stderr io.Writer
}

func (s *statusLogger) Status(st bus.Status) {
	name := "?"
	if int(st.Src) < len(s.names) {
		name = s.names[st.Src]
	}
	fmt.Fprintf(s.stderr, "source %s: %s %s\n", name, st.State, st.Reason)
	s.Collector.Status(st)
}

func parseConfirm(items []string, n int) ([]bool, error) {
	out := make([]bool, n)
	for _, it := range items {
		if strings.EqualFold(it, "all") {
			for i := range out {
				out[i] = true
			}
			continue
		}
		k, err := strconv.Atoi(it)
		if err != nil || k < 1 || k > n {
			return nil, fmt.Errorf("--confirm %q: the profile's checklist has %d item(s); give a number from 1 or \"all\"", it, n)
		}
		out[k-1] = true
	}
	return out, nil
}

func verdictCode(v string) int {
	switch v {
	case check.VerdictGo:
		return exitOK
	case check.VerdictNoGo:
		return exitNegative
	}
	return exitBad
}

// writeOutputs prints the table (or JSON with asJSON) and writes -o FILE.
func writeOutputs(r *check.Record, out string, asJSON bool, stdout, stderr io.Writer) int {
	if asJSON {
		b, err := r.JSON()
		if err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		stdout.Write(b)
	} else if err := check.WriteText(stdout, r); err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	if out == "" {
		return exitOK
	}
	f, err := os.Create(out)
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	switch strings.ToLower(filepath.Ext(out)) {
	case ".html", ".htm":
		err = check.WriteHTML(f, r)
	case ".json":
		var b []byte
		if b, err = r.JSON(); err == nil {
			_, err = f.Write(b)
		}
	default:
		err = fmt.Errorf("-o %s: give a file ending in .html or .json", out)
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	return exitOK
}

func verifyHistory(ctx context.Context, h *check.History, stdout, stderr io.Writer) int {
	n, head, probs, err := h.Verify(ctx)
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	for _, p := range probs {
		fmt.Fprintln(stdout, "ALTERED:", p.Text)
	}
	if len(probs) > 0 {
		fmt.Fprintf(stdout, "%s: %d record(s), %d problem(s): the history was altered\n", h.Path(), n, len(probs))
		return exitNegative
	}
	fmt.Fprintf(stdout, "%s: %d record(s), chain intact; newest %s\n", h.Path(), n, head)
	fmt.Fprintln(stdout, "(removing the newest records leaves no trace in the chain: compare the newest hash with a printed report)")
	return exitOK
}

func listHistory(ctx context.Context, h *check.History, packID string, asJSON bool, stdout, stderr io.Writer) int {
	key := ""
	if packID != "" {
		key = "serial:" + packID
	}
	list, err := h.List(ctx, key, 0)
	if err != nil {
		fmt.Fprintln(stderr, "check:", err)
		return exitBad
	}
	if asJSON {
		b, err := json.MarshalIndent(list, "", "  ")
		if err != nil {
			fmt.Fprintln(stderr, "check:", err)
			return exitBad
		}
		stdout.Write(append(b, '\n'))
		return exitOK
	}
	for _, s := range list {
		fmt.Fprintf(stdout, "%s  %-15s  %-10s %-20s %-9s %s  %s\n", s.Time, strings.ToUpper(s.Verdict), s.Mode, s.PackKey, s.Hash[:12], s.Operator, strings.Join(s.Failing, "; "))
	}
	return exitOK
}
