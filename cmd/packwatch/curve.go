package main

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"packwatch/analyze"
)

func runCurve(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("curve", stderr)
	profile := fs.String("profile", "", "decode with this profile `FILE` (required for a capture; a recording uses its own)")
	step := fs.String("step", "1Ah", "charge `STEP` between points (1Ah, 0.5Ah, 500mAh)")
	cells := fs.Bool("cells", false, "a curve for each cell as well as the pack")
	kind := fs.String("kind", "all", "which runs: discharge, charge or all")
	out := fs.String("o", "", "write to `FILE`: .csv, .svg or .png (default: CSV on standard output)")
	deadband := fs.Float64("deadband", 0, "current `AMPS` counted as rest (default 2 % of the rated capacity in A)")
	minDur := fs.Float64("min-duration", 0, "a rest shorter than `SECONDS` does not split a charge or discharge (default 10)")
	var compare listFlag
	fs.Var(&compare, "compare", "overlay the curves of another recording or capture `FILE` (repeatable)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch curve FILE [--step 1Ah] [--cells] [--compare OTHER]... [-o OUT.csv|OUT.svg|OUT.png]\n\nVoltage against charge moved, resampled at a fixed charge step, for each charge and discharge,\nlabelled with its C-rate and mean temperature.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) != 1 {
		fmt.Fprintln(stderr, "curve: give one recording or capture FILE")
		fs.Usage()
		return exitBad
	}
	st, err := parseStep(*step)
	if err != nil {
		fmt.Fprintln(stderr, "curve:", err)
		return exitBad
	}
	var want analyze.SegmentKind
	switch *kind {
	case "all":
	case "discharge":
		want = analyze.Discharge
	case "charge":
		want = analyze.ChargeCC
	default:
		fmt.Fprintf(stderr, "curve: --kind %q: want discharge, charge or all\n", *kind)
		return exitBad
	}
	format := "csv"
	if *out != "" {
		format = strings.TrimPrefix(strings.ToLower(filepath.Ext(*out)), ".")
		if format != "csv" && format != "svg" && format != "png" {
			fmt.Fprintf(stderr, "curve: -o %s: want a .csv, .svg or .png file\n", *out)
			return exitBad
		}
	}
	files := append([]string{pos[0]}, compare...)
	var all []analyze.Curve
	for _, file := range files {
		s, err := loadSession(ctx, file, *profile, stderr)
		if err != nil {
			fmt.Fprintln(stderr, "curve:", err)
			return exitBad
		}
		opt := analyze.Options{StepAh: st, NoCellCurves: !*cells}
		opt.Segment.DeadbandA, opt.Segment.MinDurationS = *deadband, *minDur
		cs := analyze.SessionCurves(s, opt)
		for _, c := range cs {
			if want != "" && c.Kind != want {
				continue
			}
			if len(files) > 1 {
				c.Source = filepath.Base(file)
			}
			all = append(all, c)
		}
	}
	if len(all) == 0 {
		fmt.Fprintln(stderr, "curve: no charge or discharge long enough for a curve")
		return exitNegative
	}
	var b bytes.Buffer
	switch format {
	case "csv":
		writeCurvesCSV(&b, all)
	default:
		title := "Voltage against charge moved"
		if len(files) > 1 {
			title += " (compared)"
		}
		if err := analyze.PlotCurves(&b, all, title, format, 720, 450); err != nil {
			fmt.Fprintln(stderr, "curve:", err)
			return exitBad
		}
	}
	if *out == "" {
		stdout.Write(b.Bytes())
		return exitOK
	}
	if err := os.WriteFile(*out, b.Bytes(), 0o644); err != nil {
		fmt.Fprintf(stderr, "curve: write %s: %v\n", *out, err)
		return exitBad
	}
	return exitOK
}

// writeCurvesCSV writes one row per point (RFC 4180: fields with commas or
// quotes are quoted).
func writeCurvesCSV(w io.Writer, cs []analyze.Curve) {
	bw := bufio.NewWriter(w)
	defer bw.Flush()
	bw.WriteString("source,run_from_s,kind,label,cell,mean_a,c_rate,mean_temp_c,ah,v\n")
	num := func(x analyze.Num) string {
		if !x.Valid() {
			return ""
		}
		return strconv.FormatFloat(float64(x), 'g', 6, 64)
	}
	for _, c := range cs {
		prefix := csvField(c.Source) + "," + strconv.FormatFloat(c.From, 'f', 1, 64) + "," + string(c.Kind) + "," +
			csvField(c.Label) + "," + strconv.Itoa(c.Cell) + "," + strconv.FormatFloat(c.MeanA, 'f', 3, 64) + "," +
			num(c.CRate) + "," + num(c.MeanTemp) + ","
		for k := range c.Q {
			bw.WriteString(prefix)
			bw.WriteString(strconv.FormatFloat(c.Q[k], 'f', -1, 64))
			bw.WriteByte(',')
			bw.WriteString(strconv.FormatFloat(c.V[k], 'f', 4, 64))
			bw.WriteByte('\n')
		}
	}
}

func csvField(s string) string {
	if strings.ContainsAny(s, ",\"\r\n") {
		return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
	}
	return s
}
