package check

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"time"

	"packwatch/config"
	"packwatch/pack"
)

// SchemaID names the record format; check/schema.json describes it.
const SchemaID = "packwatch-check/1"

// Caution is printed on every report, page and record.
const Caution = "The check is an aid, not a clearance. The pack's own protection (BMS, fuses, contactors), " +
	"the operator's procedures and the aircraft or vehicle documentation rule. An open contactor is not a " +
	"de-energised pack; a fast temperature rise means leave the area."

// Record is one check result as stored, exported and printed. Hash is the
// SHA-256 of the record's canonical JSON (Canonical) and PrevHash the hash
// of the record stored before it in the history, so that a removed or
// edited record breaks the chain.
type Record struct {
	Schema   string `json:"schema"`
	Time     string `json:"time"`    // when the check ran, wall clock, RFC 3339 UTC
	Verdict  string `json:"verdict"` // go | no-go | could-not-check
	Operator string `json:"operator"`
	Note     string `json:"note"`

	Pack    PackInfo    `json:"pack"`
	Profile ProfileInfo `json:"profile"`
	Data    DataInfo    `json:"data"`

	// Rules holds every rule, automatic ones then manual items, in a fixed
	// order (Sorted gives failing ones first).
	Rules    []RuleResult `json:"rules"`
	Settings []Setting    `json:"settings"`
	Manual   []string     `json:"manual"` // the checklist as the profile gives it
	Measured Measured     `json:"measured"`
	// Changes compares with the same pack's previous check; null for its first.
	Changes *Changes `json:"changes"`
	Raw     Raw      `json:"raw"`
	Caution string   `json:"caution"`

	PrevHash string `json:"prev_hash"`
	Hash     string `json:"hash,omitempty"`
}

// PackInfo identifies the checked pack.
type PackInfo struct {
	// Key groups a pack's checks in the history: "serial:S", else
	// "name:NAME" when no serial is known.
	Key    string `json:"key"`
	ID     string `json:"id"`
	Name   string `json:"name"`
	Serial string `json:"serial"`
	// SerialFrom says where Serial came from: bms (pack.serial), profile
	// ([pack] serial), operator (--pack-id) or "" when unknown.
	SerialFrom string `json:"serial_from"`
}

// ProfileInfo identifies the profile the check used.
type ProfileInfo struct {
	Name   string `json:"name"` // file name
	File   string `json:"file"`
	SHA256 string `json:"sha256"`
}

// DataInfo says where the checked data came from and how old it is.
type DataInfo struct {
	// Mode is live, replay (a recording), capture (a capture file) or
	// simulated (the simulator, live).
	Mode string `json:"mode"`
	// Source in words: "capture FILE", "recording FILE", "live sources bms, console".
	Source    string  `json:"source"`
	Simulated bool    `json:"simulated"`
	From      string  `json:"from"` // data time, RFC 3339 UTC
	To        string  `json:"to"`
	Seconds   float64 `json:"seconds"`
	// AgeS is how old the data's end was when the check ran, seconds; null live.
	AgeS      *pack.Num `json:"age_s"`
	Messages  int       `json:"messages"`
	Malformed int       `json:"malformed"`
	// Notice is the warning every output carries for data that is not live.
	Notice string `json:"notice"`
}

// Measured are the pack's key figures at the end of the window.
type Measured struct {
	SOCPct         *pack.Num `json:"soc_pct"`
	SOCSource      string    `json:"soc_source"`
	MinCellV       *pack.Num `json:"min_cell_v"`
	MaxCellV       *pack.Num `json:"max_cell_v"`
	SpreadV        *pack.Num `json:"spread_v"`
	MinTempC       *pack.Num `json:"min_temp_c"`
	MaxTempC       *pack.Num `json:"max_temp_c"`
	CurrentA       *pack.Num `json:"current_a"`
	VoltageV       *pack.Num `json:"voltage_v"`
	ResistanceMOhm *pack.Num `json:"resistance_mohm"` // from a current step in the window; null without one
}

// Changes compares a check with the same pack's previous check.
type Changes struct {
	PreviousHash   string `json:"previous_hash"`
	PreviousTime   string `json:"previous_time"`
	SOCPct         Delta  `json:"soc_pct"`
	SpreadV        Delta  `json:"spread_v"`
	ResistanceMOhm Delta  `json:"resistance_mohm"`
}

// Delta is a value then and now; Change is null when either is unknown.
type Delta struct {
	Before *pack.Num `json:"before"`
	After  *pack.Num `json:"after"`
	Change *pack.Num `json:"change"`
}

// Mode values of DataInfo.
const (
	ModeLive      = "live"
	ModeReplay    = "replay"
	ModeCapture   = "capture"
	ModeSimulated = "simulated"
)

// Inputs is what NewRecord needs besides the window.
type Inputs struct {
	Profile  *config.Profile
	PackID   string // engine id of the pack
	Operator string
	Note     string
	// PackSerial, when set, is the serial the operator gives (--pack-id); it
	// wins over the profile's, not over one the BMS reports.
	PackSerial string
	Data       DataInfo // Mode, Source, Simulated, Malformed; the rest is filled
	Confirmed  []bool   // manual items ticked, by index
	Now        time.Time
}

// NewRecord evaluates a window and makes the record of the result. A window
// without any message gives the verdict could-not-check.
func NewRecord(w Window, raw Raw, s Settings, in Inputs) *Record {
	p := in.Profile
	now := in.Now.UTC()
	r := &Record{Schema: SchemaID, Time: now.Format(time.RFC3339), Operator: in.Operator, Note: in.Note,
		Caution: Caution, Manual: append([]string{}, s.Manual...), Settings: s.List(), Raw: raw}
	r.Profile = ProfileInfo{Name: filepath.Base(p.File), File: p.File, SHA256: p.Hash}
	r.Pack = PackInfo{ID: in.PackID, Name: p.Pack.Name}
	l := last(&w)
	switch {
	case l != nil && l.Serial != "" && l.Serial != p.Pack.Serial:
		r.Pack.Serial, r.Pack.SerialFrom = l.Serial, "bms"
	case in.PackSerial != "":
		r.Pack.Serial, r.Pack.SerialFrom = in.PackSerial, "operator"
	case p.Pack.Serial != "":
		r.Pack.Serial, r.Pack.SerialFrom = p.Pack.Serial, "profile"
	}
	r.Pack.Key = "name:" + p.Pack.Name
	if r.Pack.Serial != "" {
		r.Pack.Key = "serial:" + r.Pack.Serial
	}

	d := in.Data
	d.From = time.Unix(0, w.From).UTC().Format(time.RFC3339Nano)
	d.To = time.Unix(0, w.To).UTC().Format(time.RFC3339Nano)
	d.Seconds = math.Round(w.Seconds()*1000) / 1000
	d.Messages = raw.Messages + raw.Dropped
	d.AgeS = nil
	future := 0.0
	if d.Mode != ModeLive && d.Mode != ModeSimulated && w.To > int64(365*24*time.Hour) {
		// Data times before 1971 come from a capture without a start time.
		age := math.Round(now.Sub(time.Unix(0, w.To)).Seconds())
		if age >= 0 {
			d.AgeS = nump(age)
		} else {
			future = -age
		}
	}
	d.Notice = notice(d, future)
	r.Data = d

	if l == nil {
		r.Rules = append(Evaluate(w, s), ManualRules(s.Manual, in.Confirmed, in.Operator)...)
		r.Verdict = VerdictCouldNotCheck
		return r
	}
	r.Rules = append(Evaluate(w, s), ManualRules(s.Manual, in.Confirmed, in.Operator)...)
	r.Verdict = Verdict(r.Rules)
	r.Measured = measure(w)
	return r
}

// notice is the sentence that marks data that is not live. future > 0 is
// how many seconds the data's end lies after the check (a clock set wrong,
// or a simulation started ahead).
func notice(d DataInfo, future float64) string {
	var s string
	switch d.Mode {
	case ModeLive:
		return ""
	case ModeSimulated:
		return "SIMULATED DATA: this check is not about a real pack."
	case ModeCapture:
		s = "FROM A CAPTURE, NOT LIVE"
	case ModeReplay:
		s = "FROM A RECORDING, NOT LIVE"
	default:
		s = "NOT LIVE"
	}
	if d.Simulated {
		s += ", SIMULATED DATA"
	}
	switch {
	case d.AgeS != nil:
		s += ": the data is " + ageWords(float64(*d.AgeS)) + " old"
	case future > 0:
		s += ": the data's end is " + ageWords(future) + " after the check's time (a clock set wrong, or simulated ahead)"
	default:
		s += ": the age of the data is unknown (no start time)"
	}
	return s + "."
}

func ageWords(s float64) string {
	switch {
	case s < 120:
		return fmt.Sprintf("%.0f s", s)
	case s < 2*3600:
		return fmt.Sprintf("%.0f min", s/60)
	case s < 3*86400:
		return fmt.Sprintf("%.1f h", s/3600)
	}
	return fmt.Sprintf("%.1f days", s/86400)
}

// measure takes the key figures at the end of the window.
func measure(w Window) Measured {
	l := last(&w)
	m := Measured{SOCPct: l.SOC.Pct, SOCSource: l.SOC.Source, CurrentA: l.Current, VoltageV: l.Voltage}
	var mn, mx, tmn, tmx extreme
	for _, c := range l.Cells {
		if c.V != nil && fresh(c.State) {
			mn.low(float64(*c.V), c.N, 0)
			mx.high(float64(*c.V), c.N, 0)
		}
	}
	if mn.have {
		m.MinCellV, m.MaxCellV, m.SpreadV = nump(mn.v), nump(mx.v), nump(mx.v-mn.v)
	}
	for _, t := range l.Temps {
		if t.C != nil && fresh(t.State) {
			tmn.low(float64(*t.C), t.N, 0)
			tmx.high(float64(*t.C), t.N, 0)
		}
	}
	if tmn.have {
		m.MinTempC, m.MaxTempC = nump(tmn.v), nump(tmx.v)
	}
	if r, ok := Resistance(w.Samples); ok {
		m.ResistanceMOhm = nump(r)
	}
	return m
}

// MinStepA is the smallest current step Resistance uses: smaller steps give
// a resistance lost in measurement noise (our choice).
const MinStepA = 5.0

// Resistance estimates the pack's DC resistance in mΩ from the largest
// current step between consecutive samples with a fresh current and pack
// voltage: R = ΔV / ΔI (positive current charges, so the voltage rises with
// it). False when no step reaches MinStepA.
func Resistance(samples []Sample) (float64, bool) {
	best, bestDI := 0.0, 0.0
	for i := 1; i < len(samples); i++ {
		a, b := &samples[i-1].Pack, &samples[i].Pack
		if a.Current == nil || b.Current == nil || a.Voltage == nil || b.Voltage == nil {
			continue
		}
		di := float64(*b.Current - *a.Current)
		dv := float64(*b.Voltage - *a.Voltage)
		if math.Abs(di) >= MinStepA && math.Abs(di) > math.Abs(bestDI) {
			best, bestDI = dv/di*1000, di
		}
	}
	if bestDI == 0 || best <= 0 {
		return 0, false
	}
	return best, true
}

// Compare fills r.Changes from the same pack's previous record (nil: none).
func (r *Record) Compare(prev *Record) {
	if prev == nil {
		r.Changes = nil
		return
	}
	r.Changes = &Changes{PreviousHash: prev.Hash, PreviousTime: prev.Time,
		SOCPct:         delta(prev.Measured.SOCPct, r.Measured.SOCPct),
		SpreadV:        delta(prev.Measured.SpreadV, r.Measured.SpreadV),
		ResistanceMOhm: delta(prev.Measured.ResistanceMOhm, r.Measured.ResistanceMOhm),
	}
}

func delta(before, after *pack.Num) Delta {
	d := Delta{Before: before, After: after}
	if before != nil && after != nil {
		d.Change = nump(float64(*after - *before))
	}
	return d
}

// Canonical is the record's JSON without its hash: the bytes the hash is
// taken over. Encoding a record read back from its JSON gives the same
// bytes, so anyone holding the JSON can check the hash.
func (r *Record) Canonical() ([]byte, error) {
	c := *r
	c.Hash = ""
	b, err := json.Marshal(&c)
	if err != nil {
		return nil, fmt.Errorf("encode check record: %w", err)
	}
	return b, nil
}

// ComputeHash is the hex SHA-256 of the canonical JSON.
func (r *Record) ComputeHash() (string, error) {
	b, err := r.Canonical()
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}

// ErrTampered is wrapped by errors about a record whose content does not
// match its hash, or a chain with a record missing.
var ErrTampered = errors.New("check record altered")

// VerifyHash checks that the record's content matches its hash.
func (r *Record) VerifyHash() error {
	h, err := r.ComputeHash()
	if err != nil {
		return err
	}
	if h != r.Hash {
		return fmt.Errorf("record of %s (hash %s): content does not match its hash: %w", r.Time, short(r.Hash), ErrTampered)
	}
	return nil
}

func short(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}

// ParseRecord reads a record from its JSON.
func ParseRecord(b []byte) (*Record, error) {
	var r Record
	if err := json.Unmarshal(b, &r); err != nil {
		return nil, fmt.Errorf("read check record: %w", err)
	}
	if r.Schema != SchemaID {
		return nil, fmt.Errorf("read check record: schema %q, want %q", r.Schema, SchemaID)
	}
	return &r, nil
}

// Confirm sets the manual items ticked (by index), the operator and the
// note, and recomputes the verdict. A record with a hash must not be
// changed: Confirm refuses it.
func (r *Record) Confirm(confirmed []bool, operator, note string) error {
	if r.Hash != "" {
		return fmt.Errorf("confirm: the record %s is already saved", short(r.Hash))
	}
	r.Operator, r.Note = operator, note
	auto := r.Rules[:0:0]
	for _, x := range r.Rules {
		if len(x.ID) < 7 || x.ID[:7] != "manual." {
			auto = append(auto, x)
		}
	}
	r.Rules = append(auto, ManualRules(r.Manual, confirmed, operator)...)
	if r.Verdict != VerdictCouldNotCheck {
		r.Verdict = Verdict(r.Rules)
	}
	return nil
}

// jsonOf is the record's JSON as stored and exported (with its hash).
func jsonOf(r *Record) ([]byte, error) {
	b, err := json.Marshal(r)
	if err != nil {
		return nil, fmt.Errorf("encode check record: %w", err)
	}
	return b, nil
}

// JSON is the record as exported: indented, with its hash.
func (r *Record) JSON() ([]byte, error) {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return nil, fmt.Errorf("encode check record: %w", err)
	}
	return append(b, '\n'), nil
}
