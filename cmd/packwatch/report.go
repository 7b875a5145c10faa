package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"packwatch/analyze"
	"packwatch/bus"
	"packwatch/check"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/record"
)

func runReport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("report", stderr)
	profile := fs.String("profile", "", "decode with this profile `FILE` (required for a capture; a recording uses its own)")
	asJSON := fs.Bool("json", false, "print the report as JSON on standard output")
	out := fs.String("o", "", "write the report to `FILE`: .html (a standalone page) or .json")
	step := fs.String("step", "1Ah", "charge `STEP` of the curves (1Ah, 0.5Ah, 500mAh)")
	kneeK := fs.Float64("knee-k", analyze.DefaultKneeK, "knee factor `k`: the knee is where −dV/dQ first exceeds k × its median")
	closeRatio := fs.Float64("close-ratio", analyze.DefaultCloseRatio, "pre-charge close `RATIO` of the pack voltage")
	deadband := fs.Float64("deadband", 0, "current `AMPS` counted as rest (default 2 % of the rated capacity in A)")
	minDur := fs.Float64("min-duration", 0, "a rest shorter than `SECONDS` does not split a charge or discharge (default 10)")
	minStep := fs.Float64("min-step", 0, "smallest current step in `AMPS` for resistance (default 10 % of the rated capacity in A)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch report FILE [--profile OTHER] [--json] [-o OUT.html|OUT.json]\n\nAnalyses a recording (.db) or a capture (.capture, .txt): segments, capacity and energy, knee and\nsuggested cutoff, DC resistance at current steps, incremental capacity, bursts, imbalance, pre-charge.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) != 1 {
		fmt.Fprintln(stderr, "report: give one recording or capture FILE")
		fs.Usage()
		return exitBad
	}
	st, err := parseStep(*step)
	if err != nil {
		fmt.Fprintln(stderr, "report:", err)
		return exitBad
	}
	format := ""
	if *out != "" {
		switch strings.ToLower(filepath.Ext(*out)) {
		case ".html", ".htm":
			format = "html"
		case ".json":
			format = "json"
		default:
			fmt.Fprintf(stderr, "report: -o %s: want a .html or .json file\n", *out)
			return exitBad
		}
	}
	s, err := loadSession(ctx, pos[0], *profile, stderr)
	if err != nil {
		fmt.Fprintln(stderr, "report:", err)
		return exitBad
	}
	opt := analyze.Options{StepAh: st, KneeK: *kneeK, CloseRatio: *closeRatio}
	opt.Segment.DeadbandA = *deadband
	opt.Segment.MinDurationS = *minDur
	opt.Step.MinStepA = *minStep
	rep := analyze.Analyze(s, opt)
	rep.Source = filepath.Base(pos[0])
	if *asJSON {
		if err := writeJSON(stdout, rep); err != nil {
			fmt.Fprintln(stderr, "report:", err)
			return exitBad
		}
	}
	if format != "" {
		var b bytes.Buffer
		switch format {
		case "html":
			err = analyze.WriteHTML(&b, rep)
		case "json":
			err = writeJSON(&b, rep)
		}
		if err == nil {
			err = os.WriteFile(*out, b.Bytes(), 0o644)
		}
		if err != nil {
			fmt.Fprintf(stderr, "report: write %s: %v\n", *out, err)
			return exitBad
		}
	}
	if !*asJSON {
		summary(stdout, rep)
		recordedChecks(stdout, pos[0])
	}
	return exitOK
}

// recordedChecks lists the pre-flight check results a recording holds, each
// verified against its hash. A capture holds none.
func recordedChecks(w io.Writer, path string) {
	r, err := record.Open(path)
	if err != nil {
		return // a capture, or a file analyse already reported
	}
	defer r.Close()
	checks, err := check.RecordedChecks(r)
	if err != nil || len(checks) == 0 {
		return
	}
	fmt.Fprintf(w, "pre-flight checks recorded in this session: %d\n", len(checks))
	for _, c := range checks {
		state := "record intact"
		if c.Err != nil {
			state = "RECORD DOES NOT MATCH ITS HASH: " + c.Err.Error()
		}
		fmt.Fprintf(w, "  %s  %s (%s)\n", time.Unix(0, c.T).UTC().Format(time.RFC3339), c.Text, state)
	}
}

func writeJSON(w io.Writer, rep *analyze.Report) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(rep); err != nil {
		return fmt.Errorf("json: %w", err)
	}
	return nil
}

// summary prints the main results in a few lines.
func summary(w io.Writer, r *analyze.Report) {
	n := func(x analyze.Num, dec int) string {
		if !x.Valid() {
			return "—"
		}
		return fmt.Sprintf("%.*f", dec, float64(x))
	}
	fmt.Fprintf(w, "%s: %d cells, %s s of data\n", r.Pack.Name, r.Pack.Cells, n(r.DurationS, 0))
	fmt.Fprintf(w, "discharge from full: %s Ah, %s Wh; charge %s Ah; coulombic efficiency %s, energy efficiency %s\n",
		n(r.DischargeCapacityAh, 2), n(r.DischargeEnergyWh, 0), n(r.ChargeCapacityAh, 2), n(r.CoulombicEff, 4), n(r.EnergyEff, 4))
	if r.CutoffText != "" {
		fmt.Fprintf(w, "knee and cutoff: %s (pack %s V)\n", r.CutoffText, n(r.SuggestedCutoffPackV, 2))
	}
	fmt.Fprintf(w, "resistance: %d steps measured, %d not used; bursts: %d; ICA peaks: %d; pre-charges: %d\n",
		len(r.Pulses), len(r.Rejected), len(r.Bursts), len(r.ICAPeaks), len(r.Precharge))
	if rs := r.Resistance; rs.Steps > 0 {
		fmt.Fprintf(w, "resistance, median over %d steps: pack R0 %s mΩ, after 1 s %s, after 10 s %s; outside the cells %s mΩ\n",
			rs.Steps, n(rs.Pack.R0, 2), n(rs.Pack.R1s, 2), n(rs.Pack.R10s, 2), n(rs.InterconnectR0, 2))
		var cells []string
		for _, c := range rs.Cells {
			mark := ""
			if c.Outlier {
				mark = " (stands out)"
			}
			cells = append(cells, fmt.Sprintf("%d: %s%s", c.Cell, n(c.R0, 2), mark))
		}
		if len(cells) > 0 {
			fmt.Fprintf(w, "  cells R0 (mΩ): %s\n", strings.Join(cells, ", "))
		}
	}
	const listed = 8
	for k, p := range r.Pulses {
		if k == listed {
			fmt.Fprintf(w, "  … %d more steps (see --json or -o FILE.html)\n", len(r.Pulses)-listed)
			break
		}
		fmt.Fprintf(w, "  step at %s s, ΔI %s A: R0 %s mΩ, 1 s %s, 10 s %s (%s)\n", n(p.T, 1), n(p.DeltaA, 1), n(p.R0, 2), n(p.R1s, 2), n(p.R10s, 2), p.Method)
	}
	for _, s := range r.Warnings {
		fmt.Fprintln(w, "note:", s)
	}
	fmt.Fprintln(w, "packwatch is a monitor, never the protection: a suggested cutoff is for the BMS to enforce.")
}

// parseStep reads a charge step: "1Ah", "0.5Ah", "500mAh" or a number of Ah.
func parseStep(s string) (float64, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	mult := 1.0
	switch {
	case strings.HasSuffix(t, "mah"):
		t, mult = strings.TrimSuffix(t, "mah"), 0.001
	case strings.HasSuffix(t, "ah"):
		t = strings.TrimSuffix(t, "ah")
	}
	var v float64
	if _, err := fmt.Sscan(t, &v); err != nil || v <= 0 || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, usagef("--step %q: want a positive charge such as 1Ah or 500mAh", s)
	}
	return v * mult, nil
}

// sqliteHeader starts every SQLite database file.
const sqliteHeader = "SQLite format 3\x00"

// loadSession reads a recording or a capture and decodes it into a
// session, showing progress on a terminal.
func loadSession(ctx context.Context, path, profile string, stderr io.Writer) (*analyze.Session, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	head := make([]byte, len(sqliteHeader))
	n, _ := io.ReadFull(f, head)
	f.Close()
	if n == len(sqliteHeader) && string(head) == sqliteHeader {
		return loadRecording(ctx, path, profile, stderr)
	}
	return loadCapture(ctx, path, profile, stderr)
}

func loadRecording(ctx context.Context, path, profile string, stderr io.Writer) (*analyze.Session, error) {
	r, err := record.Open(path)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	// the profile: --profile for the whole recording, else each stored
	// version from the data time it took effect
	var versions []profileAt
	if profile != "" {
		_, m, err := loadProfile(profile, stderr)
		if err != nil {
			return nil, err
		}
		versions = []profileAt{{m: m}}
	} else if versions, err = recordedProfiles(r); err != nil {
		return nil, err
	}
	c := analyze.NewCollector(versions[0].m)
	first, last, ok, err := r.Span()
	if err != nil {
		return nil, err
	}
	if !ok {
		return nil, fmt.Errorf("%s holds no messages", path)
	}
	total, err := r.Count()
	if err != nil {
		return nil, err
	}
	bar := newLoadBar(stderr, "reading "+filepath.Base(path))
	defer bar.done()
	grown := false
	c.SetStart(first)
	for k, v := range versions {
		from, to := first, last+1
		if k > 0 {
			from = v.t
			c.Use(v.m)
		}
		if k+1 < len(versions) {
			to = versions[k+1].t
		}
		if to <= from {
			continue
		}
		err = r.Scan(ctx, from, to, func(batch []bus.Message) error {
			c.Add(batch)
			if !grown && c.Messages() > 10000 {
				c.Grow(int(total) - c.Messages())
				grown = true
			}
			if last > first {
				bar.set(float64(batch[len(batch)-1].T-first) / float64(last-first))
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	bar.set(1)
	return c.Session(), nil
}

// profileAt is a compiled profile version and the data time (ns) it took
// effect.
type profileAt struct {
	t int64
	m *decode.Map
}

// recordedProfiles compiles every profile version stored in a recording,
// in the order they took effect.
func recordedProfiles(r *record.Reader) ([]profileAt, error) {
	vs, err := r.Profiles()
	if err != nil {
		return nil, err
	}
	if len(vs) == 0 {
		return nil, usagef("%s stores no profile: give --profile FILE", r.Path())
	}
	out := make([]profileAt, 0, len(vs))
	for _, v := range vs {
		p, err := config.Parse(v.Name, []byte(v.Text))
		if err != nil {
			return nil, fmt.Errorf("the profile %s stored in %s: %w", v.Name, r.Path(), err)
		}
		m, err := decode.Compile(p)
		if err != nil {
			return nil, fmt.Errorf("the profile %s stored in %s: %w", v.Name, r.Path(), err)
		}
		out = append(out, profileAt{t: v.T, m: m})
	}
	return out, nil
}

func loadCapture(ctx context.Context, path, profile string, stderr io.Writer) (*analyze.Session, error) {
	if profile == "" {
		return nil, usagef("%s is a capture: give --profile FILE to decode it", path)
	}
	p, m, err := loadProfile(profile, stderr)
	if err != nil {
		return nil, err
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	size := int64(0)
	if fi, err := f.Stat(); err == nil {
		size = fi.Size()
	}
	cnt := &countingReader{r: f}
	cr := bus.NewCaptureReader(bufio.NewReaderSize(cnt, 256*1024), sourceIndex(p))
	shown := 0
	cr.OnError = func(e *bus.CaptureError) {
		if shown < 20 {
			fmt.Fprintf(stderr, "%s: %v\n", path, e)
		}
		shown++
	}
	c := analyze.NewCollector(m)
	bar := newLoadBar(stderr, "reading "+filepath.Base(path))
	batch := make([]bus.Message, 0, 4096)
	for cr.Scan() {
		batch = append(batch, cr.Message())
		if len(batch) == cap(batch) {
			if cr.Start() != 0 && c.Messages() == 0 {
				c.SetStart(cr.Start())
			}
			c.Add(batch)
			batch = batch[:0]
			if size > 0 {
				bar.set(float64(cnt.n) / float64(size))
			}
			if err := ctx.Err(); err != nil {
				bar.done()
				return nil, err
			}
		}
	}
	if cr.Start() != 0 && c.Messages() == 0 {
		c.SetStart(cr.Start())
	}
	c.Add(batch)
	bar.set(1)
	bar.done()
	if err := cr.Err(); err != nil {
		return nil, fmt.Errorf("read %s: %w", path, err)
	}
	if cr.Malformed > 0 {
		fmt.Fprintf(stderr, "%s: %d malformed line(s) skipped\n", path, cr.Malformed)
	}
	s := c.Session()
	s.Malformed = cr.Malformed
	return s, nil
}

type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

// loadBar draws a bar on stderr when stderr is a terminal; otherwise it
// draws nothing.
type loadBar struct {
	w     io.Writer
	label string
	on    bool
	last  int
}

func newLoadBar(w io.Writer, label string) *loadBar {
	p := &loadBar{w: w, label: label, last: -1}
	if f, ok := w.(*os.File); ok {
		if fi, err := f.Stat(); err == nil && fi.Mode()&os.ModeCharDevice != 0 {
			p.on = true
		}
	}
	return p
}

func (p *loadBar) set(frac float64) {
	if !p.on {
		return
	}
	pct := int(math.Max(0, math.Min(1, frac)) * 100)
	if pct == p.last {
		return
	}
	p.last = pct
	const width = 30
	fill := pct * width / 100
	fmt.Fprintf(p.w, "\r%s [%s%s] %3d%%", p.label, strings.Repeat("#", fill), strings.Repeat(" ", width-fill), pct)
}

func (p *loadBar) done() {
	if p.on && p.last >= 0 {
		fmt.Fprint(p.w, "\r\033[K")
	}
}
