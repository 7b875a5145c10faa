package check

import (
	"embed"
	"fmt"
	"html/template"
	"io"
)

//go:embed assets/report.html.tmpl
var assets embed.FS

var reportTmpl = template.Must(template.ParseFS(assets, "assets/report.html.tmpl"))

type defaultLine struct {
	Key, Text, Unit, From string
}

// WriteHTML prints the record as a standalone printable page (a print
// stylesheet included): the verdict banner, the data's origin and age,
// every rule with failing ones first, the changes, the hash and the caution.
func WriteHTML(w io.Writer, r *Record) error {
	data := struct {
		R                *Record
		Banner           string
		Rules            []RuleResult
		Defaults         []defaultLine
		SOC, Spread, Res string
	}{R: r, Banner: r.Banner(), Rules: Sorted(r.Rules)}
	for _, s := range r.Settings {
		if s.Default {
			data.Defaults = append(data.Defaults, defaultLine{s.Key, trimNum(s.Value), s.Unit, s.From})
		}
	}
	if c := r.Changes; c != nil {
		data.SOC = deltaWords(c.SOCPct, "%.0f %%", "%+.0f points")
		data.Spread = deltaWords(c.SpreadV, "%.3f V", "%+.3f V")
		data.Res = deltaWords(c.ResistanceMOhm, "%.2f mΩ", "%+.2f mΩ")
	}
	if err := reportTmpl.Execute(w, data); err != nil {
		return fmt.Errorf("write check report: %w", err)
	}
	return nil
}
