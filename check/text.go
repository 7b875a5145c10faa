package check

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
	"unicode/utf8"
)

// Banner is the verdict in capitals, as printed at the top of every report.
func (r *Record) Banner() string {
	switch r.Verdict {
	case VerdictGo:
		return "GO"
	case VerdictNoGo:
		return "NO-GO"
	}
	return "COULD NOT CHECK"
}

// WriteText prints the record as the terminal report: the verdict, where
// the data came from (and its age when it is not live), a table of every
// rule with failing ones first, the changes since the pack's previous
// check, the defaults used, the hash and the caution.
func WriteText(w io.Writer, r *Record) error {
	var b strings.Builder
	fmt.Fprintf(&b, "PRE-FLIGHT CHECK: %s\n", r.Banner())
	if r.Data.Notice != "" {
		fmt.Fprintf(&b, "%s\n", r.Data.Notice)
	}
	b.WriteString("\n")
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	serial := "serial unknown"
	if r.Pack.Serial != "" {
		serial = fmt.Sprintf("serial %s (from %s)", r.Pack.Serial, r.Pack.SerialFrom)
	}
	fmt.Fprintf(tw, "Pack\t%s, %s\n", r.Pack.Name, serial)
	fmt.Fprintf(tw, "Profile\t%s, sha256 %s\n", r.Profile.File, r.Profile.SHA256)
	fmt.Fprintf(tw, "Data\t%s (%s): %s to %s, %.1f s, %d messages\n", r.Data.Source, r.Data.Mode, r.Data.From, r.Data.To, r.Data.Seconds, r.Data.Messages)
	op := r.Operator
	if op == "" {
		op = "(no operator given)"
	}
	fmt.Fprintf(tw, "Checked\t%s by %s\n", r.Time, op)
	if r.Note != "" {
		fmt.Fprintf(tw, "Note\t%s\n", r.Note)
	}
	tw.Flush()
	b.WriteString("\n")

	// The table: four aligned columns, the reason on its own line below.
	rows := [][4]string{{"RESULT", "RULE", "MEASURED", "REQUIRED"}}
	reasons := []string{""}
	anyDefault := false
	for _, x := range Sorted(r.Rules) {
		req := x.Required
		if x.Default {
			req += " *"
			anyDefault = true
		}
		rows = append(rows, [4]string{x.Status.Word(), x.Label, x.Measured, req})
		reasons = append(reasons, x.Reason)
	}
	var width [4]int
	for _, row := range rows {
		for i, c := range row {
			width[i] = max(width[i], utf8.RuneCountInString(c))
		}
	}
	for k, row := range rows {
		line := ""
		for i, c := range row {
			if i < 3 {
				c += strings.Repeat(" ", width[i]-utf8.RuneCountInString(c)+2)
			}
			line += c
		}
		b.WriteString(strings.TrimRight(line, " ") + "\n")
		if reasons[k] != "" {
			b.WriteString(strings.Repeat(" ", width[0]+2) + "└ " + reasons[k] + "\n")
		}
	}
	if anyDefault {
		b.WriteString("* a default: the profile's [check] section does not set it\n")
	}

	if c := r.Changes; c != nil {
		fmt.Fprintf(&b, "\nSince the previous check of this pack (%s, %s):\n", c.PreviousTime, short(c.PreviousHash))
		fmt.Fprintf(&b, "  state of charge %s, spread %s, resistance %s\n",
			deltaWords(c.SOCPct, "%.0f %%", "%+.0f points"), deltaWords(c.SpreadV, "%.3f V", "%+.3f V"), deltaWords(c.ResistanceMOhm, "%.2f mΩ", "%+.2f mΩ"))
	} else if r.Verdict != VerdictCouldNotCheck {
		b.WriteString("\nNo previous check of this pack in the history.\n")
	}

	var defs []string
	for _, s := range r.Settings {
		if s.Default {
			defs = append(defs, fmt.Sprintf("  %s = %s %s (%s)", s.Key, trimNum(s.Value), s.Unit, s.From))
		}
	}
	if len(defs) > 0 {
		b.WriteString("\nDefaults used:\n" + strings.Join(defs, "\n") + "\n")
	}
	if r.Hash != "" {
		fmt.Fprintf(&b, "\nRecord %s (chained to %s)\n", r.Hash, orNone(short(r.PrevHash)))
	}
	fmt.Fprintf(&b, "\n%s\n", r.Caution)
	_, err := io.WriteString(w, b.String())
	return err
}

func orNone(s string) string {
	if s == "" {
		return "none: the first record"
	}
	return s
}

func trimNum(v float64) string {
	s := fmt.Sprintf("%.4f", v)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	if s == "-0" {
		s = "0"
	}
	return s
}

func deltaWords(d Delta, val, chg string) string {
	if d.Before == nil && d.After == nil {
		return "not known"
	}
	before, after := "unknown", "unknown"
	if d.Before != nil {
		before = fmt.Sprintf(val, float64(*d.Before))
	}
	if d.After != nil {
		after = fmt.Sprintf(val, float64(*d.After))
	}
	s := before + " → " + after
	if d.Change != nil {
		s += " (" + fmt.Sprintf(chg, float64(*d.Change)) + ")"
	}
	return s
}
