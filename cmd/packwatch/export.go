package main

import (
	"bufio"
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"time"

	"packwatch/bus"
	"packwatch/decode"
	"packwatch/record"
)

func runExport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("export", stderr)
	format := fs.String("format", "", "csv or jsonl (default: from -o's extension, else csv)")
	every := fs.Duration("every", 0, "one CSV row per `STEP` of data time (default: a row per message)")
	stat := fs.String("stat", "last", "with --every: last, min, mean or max per step")
	var binds listFlag
	fs.Var(&binds, "bind", "only bindings matching `PATTERN` (* matches anything; repeatable)")
	fromStr := fs.String("from", "", "start at `T`: seconds from the recording's start, or RFC 3339")
	toStr := fs.String("to", "", "stop at `T`: seconds from the recording's start, or RFC 3339")
	comma := fs.Bool("decimal-comma", false, "CSV with ; between fields and decimal commas (spreadsheets in such locales)")
	out := fs.String("o", "", "output `FILE` (default standard output)")
	other := fs.String("profile", "", "re-decode with this profile `FILE` instead of the recorded one")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch export FILE [--format csv|jsonl] [--every 1s] [--stat last|min|mean|max] [--bind PATTERN]… [--from T] [--to T] [--decimal-comma] [-o OUT] [--profile OTHER]\n\nDecodes a recording's raw messages and writes them as CSV (RFC 4180) or JSON lines.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) != 1 {
		fs.Usage()
		return exitBad
	}
	if *format == "" {
		*format = "csv"
		if strings.EqualFold(filepath.Ext(*out), ".jsonl") {
			*format = "jsonl"
		}
	}
	if *format != "csv" && *format != "jsonl" {
		fmt.Fprintf(stderr, "export: --format %q: csv or jsonl\n", *format)
		return exitBad
	}
	switch *stat {
	case "last", "min", "mean", "max":
	default:
		fmt.Fprintf(stderr, "export: --stat %q: last, min, mean or max\n", *stat)
		return exitBad
	}
	r, err := record.Open(pos[0])
	if err != nil {
		fmt.Fprintln(stderr, "export:", err)
		return exitBad
	}
	defer r.Close()
	ps, ms, err := recordingProfiles(r, *other, stderr)
	if err != nil {
		fmt.Fprintln(stderr, "export:", err)
		return exitBad
	}
	if len(ps) > 1 {
		fmt.Fprintf(stderr, "export: the recording holds %d packs; exporting %q (give --profile to choose)\n", len(ps), ps[0].Pack.Name)
	}
	first, last, ok, err := r.Span()
	if err != nil || !ok {
		fmt.Fprintf(stderr, "export: %s holds no messages %v\n", pos[0], err)
		return exitBad
	}
	start := first
	if st := r.Meta().Start; !st.IsZero() && st.UnixNano() <= first {
		start = st.UnixNano()
	}
	from, err := parseWhen(*fromStr, start, math.MinInt64)
	if err == nil {
		last, err = parseWhen(*toStr, start, last)
	}
	if err != nil {
		fmt.Fprintln(stderr, "export:", err)
		return exitBad
	}
	m := ms[0]
	keep, err := bindFilter(m, binds)
	if err != nil {
		fmt.Fprintln(stderr, "export:", err)
		return exitBad
	}
	// map the recording's source indexes to the profile's
	s, err := newSessionOn(recordingDevices(r), true, ps[:1], ms[:1], "replay", nil, slog.New(slog.DiscardHandler))
	if err != nil {
		fmt.Fprintln(stderr, "export:", err)
		return exitBad
	}
	srcMap := s.packs[0].srcMap

	var w io.Writer = stdout
	if *out != "" {
		f, err := os.Create(*out)
		if err != nil {
			fmt.Fprintln(stderr, "export:", err)
			return exitBad
		}
		defer f.Close()
		w = f
	}
	bw := bufio.NewWriterSize(w, 256*1024)
	var sink exportSink
	if *format == "jsonl" {
		uw := newUpdateWriter(m, bw)
		uw.start, uw.keep = start, keep
		sink = uw
	} else {
		sink = newCSVExport(m, keep, bw, start, int64(*every), *stat, *comma)
	}
	prog := newProgress(stderr, first, last)
	err = r.Scan(ctx, from, last+1, func(batch []bus.Message) error {
		for i := range batch {
			msg := batch[i]
			if int(msg.Src) >= len(srcMap) || srcMap[msg.Src] < 0 {
				continue
			}
			msg.Src = uint16(srcMap[msg.Src])
			sink.write(&msg)
		}
		prog.at(batch[len(batch)-1].T)
		return nil
	})
	sink.finish()
	prog.done()
	if ferr := bw.Flush(); err == nil {
		err = ferr
	}
	if err != nil {
		fmt.Fprintln(stderr, "export:", err)
		return exitBad
	}
	return exitOK
}

type exportSink interface {
	write(msg *bus.Message)
	finish()
}

func (d *updateWriter) finish() {}

// parseWhen reads a --from/--to value: seconds from start, or RFC 3339.
func parseWhen(s string, start, def int64) (int64, error) {
	if s == "" {
		return def, nil
	}
	if sec, err := strconv.ParseFloat(s, 64); err == nil {
		return start + int64(sec*1e9), nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return 0, fmt.Errorf("time %q: seconds from the start, or RFC 3339 such as 2026-05-01T08:00:00Z", s)
	}
	return t.UnixNano(), nil
}

// bindFilter marks the slots matching any pattern (all when none given).
func bindFilter(m *decode.Map, patterns []string) ([]bool, error) {
	keep := make([]bool, len(m.Slots()))
	if len(patterns) == 0 {
		for i := range keep {
			keep[i] = true
		}
		return keep, nil
	}
	for _, p := range patterns {
		re := regexp.MustCompile("^" + strings.ReplaceAll(regexp.QuoteMeta(p), `\*`, ".*") + "$")
		n := 0
		for i, s := range m.Slots() {
			if re.MatchString(s.Name) {
				keep[i] = true
				n++
			}
		}
		if n == 0 {
			return nil, fmt.Errorf("--bind %q matches no binding of the profile", p)
		}
	}
	return keep, nil
}

// csvExport writes one column per kept binding.
type csvExport struct {
	m       *decode.Map
	v       *decode.Values
	cols    []int32
	w       *csv.Writer
	start   int64
	step    int64
	stat    string
	comma   bool
	rec     []string
	stepEnd int64
	acc     []acc
	cache   []string // formatted latest value per slot
	cacheT  []int64  // data time of the value in cache
}

// acc accumulates one binding over one step.
type acc struct {
	n             int
	sum, min, max float64
	last          float64
}

func newCSVExport(m *decode.Map, keep []bool, w io.Writer, start, step int64, stat string, comma bool) *csvExport {
	c := &csvExport{m: m, v: decode.NewValues(m), w: csv.NewWriter(w), start: start, step: step, stat: stat, comma: comma}
	if comma {
		c.w.Comma = ';'
	}
	header := []string{"time_utc", "t_s"}
	for i, s := range m.Slots() {
		if keep[i] {
			c.cols = append(c.cols, int32(i))
			name := s.Name
			if s.Unit != "" {
				name += " [" + s.Unit + "]"
			}
			header = append(header, name)
		}
	}
	c.w.Write(header)
	c.acc = make([]acc, len(m.Slots()))
	c.cache, c.cacheT = make([]string, len(m.Slots())), make([]int64, len(m.Slots()))
	return c
}

func (c *csvExport) num(f float64) string {
	s := strconv.FormatFloat(roundSig(f), 'f', -1, 64)
	if c.comma {
		s = strings.Replace(s, ".", ",", 1)
	}
	return s
}

// fresh reports whether slot s holds a valid value not older than its staleness at t.
func (c *csvExport) fresh(s int32, t int64) bool {
	if c.v.Flag[s] != decode.FlagOK || c.v.T[s] == 0 {
		return false
	}
	iv := c.m.Slots()[s].IntervalNs
	return iv <= 0 || t-c.v.T[s] <= 3*iv
}

func (c *csvExport) row(t int64, cell func(s int32) string) {
	c.rec = append(c.rec[:0], time.Unix(0, t).UTC().Format("2006-01-02T15:04:05.000Z"), c.num(float64(t-c.start)/1e9))
	for _, s := range c.cols {
		c.rec = append(c.rec, cell(s))
	}
	c.w.Write(c.rec)
}

func (c *csvExport) write(msg *bus.Message) {
	if c.step > 0 {
		if c.stepEnd == 0 {
			c.stepEnd = c.start + ((msg.T-c.start)/c.step+1)*c.step
		}
		for msg.T >= c.stepEnd {
			c.flushStep()
		}
	}
	c.v.Updated = c.v.Updated[:0]
	c.m.Decode(msg, c.v)
	if len(c.v.Updated) == 0 {
		return
	}
	if c.step == 0 {
		c.row(msg.T, func(s int32) string {
			if !c.fresh(s, msg.T) {
				return ""
			}
			// most columns did not change since the last row: format once
			if c.cacheT[s] != c.v.T[s] {
				c.cache[s], c.cacheT[s] = c.value(s, c.v.V[s]), c.v.T[s]
			}
			return c.cache[s]
		})
		return
	}
	for _, s := range c.v.Updated {
		if c.v.Flag[s] != decode.FlagOK {
			continue
		}
		a := &c.acc[s]
		x := c.v.V[s]
		if a.n == 0 || x < a.min {
			a.min = x
		}
		if a.n == 0 || x > a.max {
			a.max = x
		}
		a.n++
		a.sum += x
		a.last = x
	}
}

// value formats a reading: enums by name, flags as true/false.
func (c *csvExport) value(s int32, x float64) string {
	sl := &c.m.Slots()[s]
	if sl.Enum != nil {
		if name, ok := sl.Enum[c.v.Raw[s]]; ok {
			return name
		}
	}
	if sl.Bind.Bool() {
		return strconv.FormatBool(x != 0)
	}
	return c.num(x)
}

// flushStep writes the step that ends at stepEnd, stamped with its start.
func (c *csvExport) flushStep() {
	t := c.stepEnd
	c.row(t-c.step, func(s int32) string {
		a := &c.acc[s]
		if a.n == 0 {
			if c.fresh(s, t) {
				return c.value(s, c.v.V[s])
			}
			return ""
		}
		switch c.stat {
		case "min":
			return c.value(s, a.min)
		case "max":
			return c.value(s, a.max)
		case "mean":
			return c.num(a.sum / float64(a.n))
		}
		return c.value(s, a.last)
	})
	clear(c.acc)
	c.stepEnd += c.step
}

func (c *csvExport) finish() {
	if c.step > 0 && c.stepEnd != 0 {
		c.flushStep()
	}
	c.w.Flush()
}

// progress draws a bar on stderr when it is a terminal.
type progress struct {
	w           io.Writer
	first, last int64
	on          bool
	next        time.Time
}

func newProgress(w io.Writer, first, last int64) *progress {
	p := &progress{w: w, first: first, last: last}
	if f, ok := w.(*os.File); ok {
		if st, err := f.Stat(); err == nil && st.Mode()&os.ModeCharDevice != 0 {
			p.on = true
		}
	}
	return p
}

func (p *progress) at(t int64) {
	if !p.on || time.Now().Before(p.next) || p.last <= p.first {
		return
	}
	p.next = time.Now().Add(200 * time.Millisecond)
	frac := min(1, max(0, float64(t-p.first)/float64(p.last-p.first)))
	n := int(frac * 30)
	fmt.Fprintf(p.w, "\r[%s%s] %3.0f %%", strings.Repeat("#", n), strings.Repeat(".", 30-n), frac*100)
}

func (p *progress) done() {
	if p.on {
		fmt.Fprintf(p.w, "\r%s\r", strings.Repeat(" ", 40))
	}
}
