package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"packwatch/analyze"
	"packwatch/record"
)

// addReview mounts the review page's API (reviewHandlers) into a replay's
// extra routes. A recording that cannot be analysed still replays: the
// reason goes to stderr and the review routes stay absent.
func addReview(ctx context.Context, extra map[string]http.Handler, path, profile string, stderr io.Writer) {
	h, err := reviewHandlers(ctx, path, profile)
	if err != nil {
		fmt.Fprintf(stderr, "replay: the review page is unavailable: %v\n", err)
		return
	}
	for k, v := range h {
		extra[k] = v
	}
}

// reviewHandlers analyses the recording at path once (with the defaults of
// `packwatch report`) and serves the review page's data:
//
//	GET /api/review/report.json  the JSON `report --json` prints
//	GET /api/review/report.html  the standalone report page, as a download
//	GET /api/review/export.csv   the recording as `export --every 1s` writes it
//	GET /api/review/series       per-second chart columns from the stats table
//
// profile, when not empty, re-decodes with that profile file as replay's
// --profile does.
func reviewHandlers(ctx context.Context, path, profile string) (map[string]http.Handler, error) {
	s, err := loadSession(ctx, path, profile, io.Discard)
	if err != nil {
		return nil, fmt.Errorf("analyse %s: %w", path, err)
	}
	step, _ := parseStep("1Ah") // report's default --step
	rep := analyze.Analyze(s, analyze.Options{StepAh: step, KneeK: analyze.DefaultKneeK, CloseRatio: analyze.DefaultCloseRatio})
	rep.Source = filepath.Base(path)
	var js, page bytes.Buffer
	if err := writeJSON(&js, rep); err != nil {
		return nil, fmt.Errorf("report of %s: %w", path, err)
	}
	if err := analyze.WriteHTML(&page, rep); err != nil {
		return nil, fmt.Errorf("report page of %s: %w", path, err)
	}
	series, err := reviewSeries(path)
	if err != nil {
		return nil, err
	}
	stem := strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
	return map[string]http.Handler{
		"/api/review/report.json": reviewBody("application/json", "", js.Bytes()),
		"/api/review/report.html": reviewBody("text/html; charset=utf-8", stem+"-report.html", page.Bytes()),
		"/api/review/series":      reviewBody("application/json", "", series),
		"/api/review/export.csv":  reviewExport(path, profile, stem+".csv"),
	}, nil
}

// reviewBody serves a fixed body; a non-empty name makes it a download.
func reviewBody(ctype, name string, body []byte) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, req *http.Request) {
		if req.Method != http.MethodGet && req.Method != http.MethodHead {
			http.Error(w, "GET only", http.StatusMethodNotAllowed)
			return
		}
		w.Header().Set("Content-Type", ctype)
		if name != "" {
			w.Header().Set("Content-Disposition", `attachment; filename="`+name+`"`)
		}
		w.Write(body)
	})
}

// reviewExport runs `packwatch export FILE --every 1s` into a temporary
// file per request and sends it as a download.
func reviewExport(path, profile, name string) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, req *http.Request) {
		if req.Method != http.MethodGet {
			http.Error(w, "GET only", http.StatusMethodNotAllowed)
			return
		}
		dir, err := os.MkdirTemp("", "packwatch-review")
		if err != nil {
			http.Error(w, "export: "+err.Error(), http.StatusInternalServerError)
			return
		}
		defer os.RemoveAll(dir)
		out := filepath.Join(dir, "export.csv")
		args := []string{"export", path, "--every", "1s", "-o", out}
		if profile != "" {
			args = append(args, "--profile", profile)
		}
		var errb bytes.Buffer
		if code := run(req.Context(), args, io.Discard, &errb); code != exitOK {
			http.Error(w, fmt.Sprintf("export failed (exit %d): %s", code, errb.String()), http.StatusInternalServerError)
			return
		}
		f, err := os.Open(out)
		if err != nil {
			http.Error(w, "export: "+err.Error(), http.StatusInternalServerError)
			return
		}
		defer f.Close()
		w.Header().Set("Content-Type", "text/csv; charset=utf-8")
		w.Header().Set("Content-Disposition", `attachment; filename="`+name+`"`)
		io.Copy(w, f)
	})
}

// reviewColumn is one chart line of the series table; null where the
// second has no value.
type reviewColumn struct {
	Key    string     `json:"key"`
	Label  string     `json:"label"`
	Unit   string     `json:"unit"`
	Values []*float64 `json:"values"`
}

var reviewCellRe = regexp.MustCompile(`^cell\[(\d+)\]\.voltage$`)
var reviewTempRe = regexp.MustCompile(`^temp\[(\d+)\]$`)

// reviewSeries builds the per-second chart table of a recording from its
// decimated stats (record.Reader.Stats): pack voltage, current and SOC (the
// last value of each second), the lowest and highest cell (the minimum of
// the cells' minima, the maximum of their maxima) and each temperature.
// Times are seconds from the recording's first message, as the report's.
// A recording with several packs charts the first.
func reviewSeries(path string) ([]byte, error) {
	r, err := record.Open(path)
	if err != nil {
		return nil, fmt.Errorf("series of %s: %w", path, err)
	}
	defer r.Close()
	first, _, _, err := r.Span()
	if err != nil {
		return nil, fmt.Errorf("series of %s: %w", path, err)
	}
	binds, err := r.Binds()
	if err != nil {
		return nil, err
	}
	prefix := ""
	plain := false
	for _, b := range binds {
		if !strings.Contains(b, ":") {
			plain = true
			break
		}
	}
	if !plain && len(binds) > 0 {
		prefix = binds[0][:strings.Index(binds[0], ":")+1]
	}
	var cells []string
	type tempBind struct {
		name string
		n    int
	}
	var temps []tempBind
	has := map[string]bool{}
	for _, b := range binds {
		if !strings.HasPrefix(b, prefix) || (prefix == "" && strings.Contains(b, ":")) {
			continue
		}
		name := strings.TrimPrefix(b, prefix)
		has[name] = true
		if reviewCellRe.MatchString(name) {
			cells = append(cells, b)
		}
		if m := reviewTempRe.FindStringSubmatch(name); m != nil {
			n, _ := strconv.Atoi(m[1])
			temps = append(temps, tempBind{b, n})
		}
	}
	sort.Slice(temps, func(i, j int) bool { return temps[i].n < temps[j].n })

	// every column keyed by second, then laid on the union of seconds
	cols := []reviewColumn{}
	byCol := []map[int64]float64{}
	add := func(key, label, unit string, m map[int64]float64) {
		if len(m) == 0 {
			return
		}
		cols = append(cols, reviewColumn{Key: key, Label: label, Unit: unit})
		byCol = append(byCol, m)
	}
	last := func(bind string) (map[int64]float64, error) {
		pts, err := r.Stats(bind, math.MinInt64, math.MaxInt64)
		if err != nil {
			return nil, err
		}
		m := make(map[int64]float64, len(pts))
		for _, p := range pts {
			m[p.Sec] = p.Last
		}
		return m, nil
	}
	for _, c := range []struct{ bind, label, unit string }{
		{"pack.voltage", "Pack voltage", "V"}, {"pack.current", "Current", "A"}, {"pack.soc", "SOC", "%"},
	} {
		if !has[c.bind] {
			continue
		}
		m, err := last(prefix + c.bind)
		if err != nil {
			return nil, err
		}
		add(c.bind, c.label, c.unit, m)
	}
	if len(cells) > 0 {
		lo, hi := map[int64]float64{}, map[int64]float64{}
		for _, b := range cells {
			pts, err := r.Stats(b, math.MinInt64, math.MaxInt64)
			if err != nil {
				return nil, err
			}
			for _, p := range pts {
				if v, ok := lo[p.Sec]; !ok || p.Min < v {
					lo[p.Sec] = p.Min
				}
				if v, ok := hi[p.Sec]; !ok || p.Max > v {
					hi[p.Sec] = p.Max
				}
			}
		}
		add("cell.min", "Lowest cell", "V", lo)
		add("cell.max", "Highest cell", "V", hi)
	}
	for _, tb := range temps {
		m, err := last(tb.name)
		if err != nil {
			return nil, err
		}
		add(strings.TrimPrefix(tb.name, prefix), fmt.Sprintf("Temperature %d", tb.n), "°C", m)
	}
	secSet := map[int64]bool{}
	for _, m := range byCol {
		for s := range m {
			secSet[s] = true
		}
	}
	secs := make([]int64, 0, len(secSet))
	for s := range secSet {
		secs = append(secs, s)
	}
	sort.Slice(secs, func(i, j int) bool { return secs[i] < secs[j] })
	t := make([]float64, len(secs))
	for i, s := range secs {
		// the middle of the second, from the first message
		t[i] = math.Round((float64(s)+0.5-float64(first)/1e9)*1000) / 1000
	}
	for k := range cols {
		vals := make([]*float64, len(secs))
		for i, s := range secs {
			if v, ok := byCol[k][s]; ok && !math.IsNaN(v) && !math.IsInf(v, 0) {
				v := v
				vals[i] = &v
			}
		}
		cols[k].Values = vals
	}
	body, err := json.Marshal(map[string]any{"start_t": float64(first) / 1e9, "t_s": t, "columns": cols})
	if err != nil {
		return nil, fmt.Errorf("series of %s: %w", path, err)
	}
	return body, nil
}
