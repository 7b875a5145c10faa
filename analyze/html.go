package analyze

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"io"
	"math"
	"time"
)

// WriteHTML writes the report as one standalone HTML page: the figures are
// inlined as SVG data, the styles are in the page, nothing is fetched, and
// it prints on A4 or letter. The safety caution stands at the top.
func WriteHTML(w io.Writer, rep *Report) error {
	figs, err := figures(rep)
	if err != nil {
		return err
	}
	data := struct {
		R       *Report
		Figs    map[string]template.URL
		Started string
	}{rep, figs, ""}
	if rep.StartUnix.Valid() && rep.StartUnix > 0 {
		sec, frac := math.Modf(float64(rep.StartUnix))
		data.Started = time.Unix(int64(sec), int64(frac*1e9)).UTC().Format("2006-01-02 15:04:05 UTC")
	}
	var buf bytes.Buffer
	if err := reportTmpl.Execute(&buf, data); err != nil {
		return fmt.Errorf("html report: %w", err)
	}
	_, err = w.Write(buf.Bytes())
	return err
}

// figures draws the report's plots as SVG data URLs.
func figures(rep *Report) (map[string]template.URL, error) {
	out := map[string]template.URL{}
	put := func(name string, draw func(w io.Writer) error) error {
		var b bytes.Buffer
		if err := draw(&b); err != nil {
			return err
		}
		out[name] = template.URL("data:image/svg+xml;base64," + base64.StdEncoding.EncodeToString(b.Bytes()))
		return nil
	}
	var pack, cells []Curve
	for _, c := range rep.Curves {
		if c.Cell == 0 {
			pack = append(pack, c)
		} else if c.Kind == Discharge && c.From == float64(rep.FullAtS) {
			cells = append(cells, c)
		}
	}
	if len(pack) > 0 {
		if err := put("pack", func(w io.Writer) error {
			return PlotCurves(w, pack, "Pack voltage against charge moved", "svg", 640, 380)
		}); err != nil {
			return nil, err
		}
	}
	if len(cells) > 0 {
		if err := put("cells", func(w io.Writer) error {
			return PlotCurves(w, cells, "Cells on the measured discharge", "svg", 640, 380)
		}); err != nil {
			return nil, err
		}
	}
	if len(rep.ICA) > 0 {
		var names []string
		var xs, ys [][]float64
		for _, ic := range rep.ICA {
			names = append(names, fmt.Sprintf("%s at %.0f s, %.2g C", ic.Kind, float64(ic.From), float64(ic.CRate)))
			xs, ys = append(xs, floats(ic.V)), append(ys, floats(ic.DQDV))
		}
		if err := put("ica", func(w io.Writer) error {
			return PlotXY(w, "Incremental capacity dQ/dV", "mean cell voltage (V)", "dQ/dV (Ah/V)", names, xs, ys, "svg", 640, 340)
		}); err != nil {
			return nil, err
		}
	}
	if len(rep.Imbalance.T) > 1 {
		if err := put("spread", func(w io.Writer) error {
			return PlotXY(w, "Cell spread (highest − lowest)", "time (s)", "spread (V)", nil,
				[][]float64{floats(rep.Imbalance.T)}, [][]float64{floats(rep.Imbalance.SpreadV)}, "svg", 640, 260)
		}); err != nil {
			return nil, err
		}
	}
	return out, nil
}

func floats(x []Num) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = float64(v)
	}
	return out
}

// fmtNum formats a number with the given decimals, or "—" when missing.
func fmtNum(n Num, dec int) string {
	if !n.Valid() {
		return "—"
	}
	return fmt.Sprintf("%.*f", dec, float64(n))
}

var reportTmpl = template.Must(template.New("report").Funcs(template.FuncMap{
	"n":   fmtNum,
	"pct": func(n Num) string { return fmtNum(n*100, 1) },
	"f":   func(x float64, dec int) string { return fmtNum(Num(x), dec) },
	"mv":  func(n Num) Num { return n * 1000 },
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>packwatch session report – {{.R.Pack.Name}}</title>
<style>
body{font:11pt/1.4 system-ui,sans-serif;margin:2em auto;max-width:52em;color:#111;padding:0 1em}
h1{font-size:1.5em;margin-bottom:.2em}h2{font-size:1.2em;border-bottom:1px solid #999;margin-top:1.6em}
table{border-collapse:collapse;margin:.5em 0;font-size:.92em}td,th{border:1px solid #bbb;padding:.2em .5em;text-align:right}
th{background:#eee}td.l,th.l{text-align:left}.caution{border:2px solid #8a1c1c;padding:.6em 1em;background:#fff4f2}
.note{color:#333;font-size:.9em}.warn{color:#8a1c1c}img{max-width:100%;height:auto}
section,table,figure{page-break-inside:avoid;break-inside:avoid}
@media print{body{margin:0;max-width:none;font-size:10pt}.caution{background:none}h2{page-break-after:avoid}}
</style></head><body>
<h1>Session report: {{.R.Pack.Name}}</h1>
<p class="note">{{.R.Pack.Cells}} cells, rated {{f .R.Pack.CapacityAh 1}} Ah{{if .R.Source}}; file {{.R.Source}}{{end}}{{if .Started}}; started {{.Started}}{{end}}; {{n .R.DurationS 0}} s of data, {{.R.Messages}} messages.</p>
<div class="caution"><strong>Caution.</strong> {{.R.Safety}}</div>

<section><h2>Capacity and energy</h2>
<table>
<tr><th class="l">full at</th><td>{{n .R.FullAtS 1}} s ({{.R.FullFrom}})</td></tr>
<tr><th class="l">discharged from full</th><td>{{n .R.DischargeCapacityAh 2}} Ah, {{n .R.DischargeEnergyWh 0}} Wh at {{n .R.DischargeMeanA 1}} A</td></tr>
<tr><th class="l">charged</th><td>{{n .R.ChargeCapacityAh 2}} Ah, {{n .R.ChargeEnergyWh 0}} Wh</td></tr>
<tr><th class="l">coulombic efficiency</th><td>{{pct .R.CoulombicEff}} %</td></tr>
<tr><th class="l">energy efficiency</th><td>{{pct .R.EnergyEff}} %</td></tr>
</table></section>

<section><h2>Knee and suggested cutoff</h2>
<p>{{if .R.CutoffText}}<strong>{{.R.CutoffText}}.</strong>{{else}}No knee found.{{end}}</p>
<table>
<tr><th class="l">knee (pack curve, per cell)</th><td>{{n .R.KneeVPerCell 3}} V at {{n .R.KneeAh 2}} Ah from full</td></tr>
<tr><th class="l">suggested cutoff per cell</th><td>{{n .R.SuggestedCutoffVPerCell 3}} V</td></tr>
<tr><th class="l">suggested cutoff, pack</th><td>{{n .R.SuggestedCutoffPackV 2}} V</td></tr>
<tr><th class="l">charge below the cutoff</th><td>{{n .R.AhBelowCutoff 2}} Ah</td></tr>
<tr><th class="l">at</th><td>{{n .R.CutoffCRate 3}} C, {{n .R.CutoffTempC 1}} °C</td></tr>
<tr><th class="l">weakest cell</th><td>{{with .R.WeakestCell}}cell {{.}}{{else}}—{{end}}</td></tr>
</table>
<p class="note">Rule: {{.R.KneeRule}}. A cutoff is a suggestion for the BMS to enforce at this current and temperature; at a higher current or a lower temperature the same charge lies at a lower voltage.</p>
{{with index .Figs "pack"}}<figure><img src="{{.}}" alt="pack voltage against charge"></figure>{{end}}
{{with index .Figs "cells"}}<figure><img src="{{.}}" alt="cell voltages against charge"></figure>{{end}}
</section>

<section><h2>DC internal resistance at current steps</h2>
<p class="note">{{.R.ResistanceNote}}</p>
{{if .R.Pulses}}<p>Medians over {{.R.Resistance.Steps}} steps: pack R0 {{n .R.Resistance.Pack.R0 2}} mΩ, after 1 s {{n .R.Resistance.Pack.R1s 2}} mΩ, after 10 s {{n .R.Resistance.Pack.R10s 2}} mΩ; outside the cells {{n .R.Resistance.InterconnectR0 2}} mΩ.</p>
<table><tr><th>cell</th><th>R0 (mΩ)</th><th>R 1 s</th><th>R 10 s</th></tr>
{{range .R.Resistance.Cells}}<tr{{if .Outlier}} class="warn"{{end}}><td>{{.Cell}}</td><td>{{n .R0 2}}</td><td>{{n .R1s 2}}</td><td>{{n .R10s 2}}</td></tr>{{end}}</table>
<table>
<tr><th>t (s)</th><th class="l">method</th><th>ΔI (A)</th><th>R0 (mΩ)</th><th>R 1 s</th><th>R 10 s</th><th>cells R0 (mΩ)</th><th>outside cells (mΩ)</th><th>SOC (%)</th><th>T (°C)</th></tr>
{{range $i, $p := .R.Pulses}}{{if lt $i 40}}{{with $p}}<tr><td>{{n .T 1}}</td><td class="l">{{.Method}}</td><td>{{n .DeltaA 1}}</td><td>{{n .R0 2}}</td><td>{{n .R1s 2}}</td><td>{{n .R10s 2}}</td>
<td class="l">{{range .Cells}}{{if .Outlier}}<strong class="warn">{{.Cell}}: {{n .R0 2}}</strong>{{else}}{{.Cell}}: {{n .R0 2}}{{end}} {{end}}</td><td>{{n .InterconnectR0 2}}</td><td>{{n .SOCPct 0}}</td><td>{{n .TempC 1}}</td></tr>
{{end}}{{end}}{{end}}</table>{{if gt (len .R.Pulses) 40}}<p class="note">The first 40 of {{len .R.Pulses}} steps; the JSON report lists them all.</p>{{end}}{{else}}<p>No usable current step.</p>{{end}}
{{if .R.Rejected}}<p class="note">Steps not used: {{range .R.Rejected}}{{n .T 1}} s ({{.Reason}}); {{end}}</p>{{end}}
{{if .R.RejectedCounts}}<p class="note">All steps not used, by reason: {{range $k, $v := .R.RejectedCounts}}{{$k}}: {{$v}}; {{end}}</p>{{end}}
</section>

<section><h2>Bursts</h2>
{{if .R.Bursts}}<table>
<tr><th>t (s)</th><th>end (s)</th><th>peak (A)</th><th>Ah</th><th>pack sag (V)</th><th>lowest cell</th><th>cell sag (V)</th><th>recovery after 30 s (V)</th><th>temperature rise (K)</th></tr>
{{range .R.Bursts}}<tr><td>{{n .From 1}}</td><td>{{n (.To) 1}}</td><td>{{n .PeakA 0}}</td><td>{{n .Ah 3}}</td><td>{{n .SagV 2}}</td><td>{{if .MinCell}}cell {{.MinCell}}: {{n .MinCellV 3}} V{{else}}—{{end}}</td><td>{{n .SagCellV 3}}</td><td>{{n .RecoveryPackV 2}} / {{n .RecoveryCellV 3}}</td><td class="l">{{range .TempRise}}{{n . 1}} {{end}}</td></tr>
{{end}}</table>{{else}}<p>No high-current burst.</p>{{end}}
</section>

<section><h2>Incremental capacity</h2>
{{with index .Figs "ica"}}<figure><img src="{{.}}" alt="dQ/dV"></figure>{{end}}
{{range .R.ICA}}<p class="note">{{.Kind}} from {{n .From 0}} s at {{n .CRate 3}} C: {{.Method}}.{{if .Warning}} <span class="warn">{{.Warning}}</span>{{end}}</p>
{{if .Peaks}}<table><tr><th>peak (V per cell)</th><th>dQ/dV (Ah/V)</th></tr>{{range .Peaks}}<tr><td>{{n .V 3}}</td><td>{{n .Height 1}}</td></tr>{{end}}</table>{{end}}
{{else}}<p>No constant-current run long enough.</p>{{end}}
</section>

<section><h2>Imbalance</h2>
<p>Largest spread {{n .R.Imbalance.MaxSpread 3}} V at {{n .R.Imbalance.MaxAt 0}} s.</p>
{{with index .Figs "spread"}}<figure><img src="{{.}}" alt="cell spread"></figure>{{end}}
{{if .R.Imbalance.Cells}}<table><tr><th>cell</th><th>mean deviation (mV)</th><th>drift (mV)</th></tr>
{{range .R.Imbalance.Cells}}<tr{{if .Drifting}} class="warn"{{end}}><td>{{.Cell}}</td><td>{{n (mv .MeanDev) 1}}</td><td>{{n (mv .Drift) 1}}</td></tr>{{end}}</table>{{end}}
</section>

{{if .R.Precharge}}<section><h2>Pre-charge</h2><table>
<tr><th>t (s)</th><th>time to {{range $i, $p := .R.Precharge}}{{if eq $i 0}}{{pct $p.CloseRatio}}{{end}}{{end}} % (s)</th><th>main closed (s)</th><th>ratio at close (%)</th><th class="l">note</th></tr>
{{range .R.Precharge}}<tr><td>{{n .Start 2}}</td><td>{{n .TimeToRatio 3}}</td><td>{{n .MainClosed 2}}</td><td>{{pct .RatioAtClose}}</td><td class="l">{{.Flag}}</td></tr>{{end}}
</table></section>{{end}}

<section><h2>Segments</h2><table>
<tr><th class="l">kind</th><th>from (s)</th><th>to (s)</th><th>mean (A)</th><th>Ah</th><th>T (°C)</th></tr>
{{range .R.Segments}}<tr><td class="l">{{.Kind}}</td><td>{{f .From 1}}</td><td>{{f .To 1}}</td><td>{{f .MeanA 2}}</td><td>{{f .Ah 3}}</td><td>{{n .MeanTemp 1}}</td></tr>{{end}}
</table></section>

{{if .R.Warnings}}<section><h2>Notes</h2><ul>{{range .R.Warnings}}<li>{{.}}</li>{{end}}</ul></section>{{end}}
<p class="note">Made by packwatch. Positive current is charging. {{.R.Safety}}</p>
</body></html>
`))
