package check

import (
	"fmt"
	"sort"
	"strings"

	"packwatch/pack"
)

// Status is the outcome of one rule.
type Status string

// Rule outcomes. Only PASS and NOT CHECKED allow a go; NO DATA is never a go.
const (
	// Pass: measured and inside the requirement for the whole window.
	Pass Status = "pass"
	// Fail: measured and outside the requirement at some time in the window.
	Fail Status = "fail"
	// NoData: the rule could not be confirmed: a reading was missing or stale,
	// or the operator did not confirm a manual item.
	NoData Status = "no_data"
	// NotChecked: the profile binds nothing this rule could read (no fault
	// flag, or not both contactor feedback and command). The report lists it
	// so the operator knows the check did not cover it.
	NotChecked Status = "not_checked"
)

// Word is the status as the table prints it.
func (s Status) Word() string {
	switch s {
	case Pass:
		return "PASS"
	case Fail:
		return "FAIL"
	case NoData:
		return "NO DATA"
	case NotChecked:
		return "NOT CHECKED"
	}
	return strings.ToUpper(string(s))
}

// rank orders statuses for display: failing rules first.
func (s Status) rank() int {
	switch s {
	case Fail:
		return 0
	case NoData:
		return 1
	case NotChecked:
		return 2
	}
	return 3
}

// RuleResult is the outcome of one rule over the checked window.
type RuleResult struct {
	// ID names the rule: reporting, cell_low_margin, cell_high_margin,
	// spread, soc, temperature, charge_temperature, rest_current,
	// fault_flags, contactor, trips, rate.SOURCE, manual.N.
	ID    string `json:"id"`
	Label string `json:"label"`
	// Status is pass, fail, no_data or not_checked.
	Status Status `json:"status"`
	// Measured and Required are in words with units ("3.412 V (cell 7)").
	Measured string `json:"measured"`
	Required string `json:"required"`
	// Reason says in plain words why the rule has its status.
	Reason string `json:"reason"`
	// Value and Limit are the numbers compared, in Unit; null when none.
	Value *pack.Num `json:"value"`
	Limit *pack.Num `json:"limit"`
	Unit  string    `json:"unit,omitempty"`
	// Subject is the cell, sensor, source or binding the value belongs to.
	Subject string `json:"subject,omitempty"`
	// Default is true when the requirement is a default, not a [check] key.
	Default bool `json:"default"`
}

// Verdicts of a whole check.
const (
	VerdictGo            = "go"
	VerdictNoGo          = "no-go"
	VerdictCouldNotCheck = "could-not-check"
)

// Verdict is "go" when every rule passed (or was not checked because the
// profile binds nothing for it) and there is at least one rule; else
// "no-go". NO DATA is never a go.
func Verdict(rules []RuleResult) string {
	if len(rules) == 0 {
		return VerdictNoGo
	}
	for _, r := range rules {
		if r.Status != Pass && r.Status != NotChecked {
			return VerdictNoGo
		}
	}
	return VerdictGo
}

// Sorted returns the rules with failing ones first: FAIL, NO DATA, NOT
// CHECKED, PASS, each group in its original order.
func Sorted(rules []RuleResult) []RuleResult {
	out := append([]RuleResult(nil), rules...)
	sort.SliceStable(out, func(i, j int) bool { return out[i].Status.rank() < out[j].Status.rank() })
	return out
}

// ManualRules turns the checklist into rules: a confirmed item passes, an
// unconfirmed one is NO DATA (never a go). confirmed[i] belongs to items[i];
// a short slice leaves the rest unconfirmed. by names who confirmed.
func ManualRules(items []string, confirmed []bool, by string) []RuleResult {
	out := make([]RuleResult, len(items))
	for i, it := range items {
		r := RuleResult{ID: fmt.Sprintf("manual.%d", i+1), Label: it, Required: "confirmed by the operator"}
		if i < len(confirmed) && confirmed[i] {
			r.Status, r.Measured = Pass, "confirmed"
			if by != "" {
				r.Measured = "confirmed by " + by
			}
			r.Reason = "the operator confirmed it by hand"
		} else {
			r.Status, r.Measured = NoData, "not confirmed"
			r.Reason = "a checklist item the operator has not confirmed"
		}
		out[i] = r
	}
	return out
}

func nump(v float64) *pack.Num {
	n := pack.Num(v)
	return &n
}
