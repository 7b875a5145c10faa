package pack

// Snapshot is everything the page, the REST API, /metrics and the check read:
// the state of every pack at one moment. It is built once per tick by
// Engine.Snapshot and never changed afterwards, so it may be shared.
//
// Numbers that have no valid reading are nil and marshal as JSON null
// (RFC 8259 §6: NaN and Infinity are not JSON numbers).
type Snapshot struct {
	Seq        uint64 `json:"seq"`
	ServerTime string `json:"server_time"` // wall clock, RFC 3339 UTC
	DataT      Num    `json:"data_t"`      // data time, seconds since the Unix epoch
	// Mode is "live", "simulated" or "replay"; the page marks anything not live.
	Mode  string         `json:"mode"`
	Packs []PackSnapshot `json:"packs"`
	// Recording is the session's recording, nil when none.
	Recording *RecordingSnap `json:"recording,omitempty"`
}

// RecordingSnap is the state of the session's recording, for the page.
type RecordingSnap struct {
	File     string `json:"file"`
	State    string `json:"state"`           // recording | stopped
	Error    string `json:"error,omitempty"` // why it stopped (disk full, unwritable)
	Messages uint64 `json:"messages"`        // committed so far
	Dropped  uint64 `json:"dropped"`         // not recorded (queue overrun, disk full)
}

// PackSnapshot is one pack's state.
type PackSnapshot struct {
	ID     string `json:"id"` // short key, unique in the engine
	Name   string `json:"name"`
	Serial string `json:"serial,omitempty"`
	// State is the worst of all margins and alarms: ok | warn | trip | nodata.
	State string `json:"state"`

	Cells     []CellSnap `json:"cells"`
	CellStats CellStats  `json:"cell_stats"`
	Temps     []TempSnap `json:"temps"`
	TempStats TempStats  `json:"temp_stats"`

	Current       *Num   `json:"current_a"` // positive = charging
	Voltage       *Num   `json:"voltage_v"`
	VoltageSource string `json:"voltage_source"` // reported | sum | none
	Power         *Num   `json:"power_w"`        // positive = charging
	// CurrentWord is "charging", "discharging", "rest" or "" when unknown.
	CurrentWord string `json:"current_word"`

	SOC     SOCSnap     `json:"soc"`
	Margins []Margin    `json:"margins"` // nearest trip first
	Alarms  []AlarmSnap `json:"alarms"`
	// Values holds every binding with its latest reading, for the generic
	// panels (contactors, charger, BMS state, faults, aux).
	Values  []ValueSnap  `json:"values"`
	Sources []SourceSnap `json:"sources"`
	Decode  DecodeStats  `json:"decode"`
	// Limits echoes the profile's limits the page needs to draw scales.
	Limits LimitsSnap `json:"limits"`
	// Profile error from a failed reload, "" when the profile in use is the file on disk.
	ProfileError string `json:"profile_error,omitempty"`
}

// CellSnap is one cell.
type CellSnap struct {
	N         int    `json:"n"`
	V         *Num   `json:"v"`
	State     string `json:"state"` // ok | warn | trip | stale | fault | missing
	Age       *Num   `json:"age_s"` // data seconds since its last update
	Balancing *bool  `json:"balancing,omitempty"`
	Min       bool   `json:"is_min,omitempty"`
	Max       bool   `json:"is_max,omitempty"`
}

// CellStats are the derived cell values.
type CellStats struct {
	Min       *Num `json:"min_v"`
	MinCell   int  `json:"min_cell"`
	Max       *Num `json:"max_v"`
	MaxCell   int  `json:"max_cell"`
	Avg       *Num `json:"avg_v"`
	Spread    *Num `json:"spread_v"`
	Deviation *Num `json:"deviation_v"` // largest |cell - average|
	DevCell   int  `json:"deviation_cell"`
	Reporting int  `json:"reporting"` // cells with a fresh value
}

// TempSnap is one temperature sensor.
type TempSnap struct {
	N     int    `json:"n"`
	C     *Num   `json:"c"`
	Role  string `json:"role"`
	State string `json:"state"` // ok | warn | trip | stale | fault | missing
	Age   *Num   `json:"age_s"`
}

// TempStats are the derived temperature values.
type TempStats struct {
	Min       *Num `json:"min_c"`
	MinSensor int  `json:"min_sensor"`
	Max       *Num `json:"max_c"`
	MaxSensor int  `json:"max_sensor"`
	// RiseCPerMin is the fastest rise of any sensor over the last minute.
	RiseCPerMin *Num `json:"rise_c_per_min"`
}

// SOCSnap is state of charge and counted charge.
type SOCSnap struct {
	Pct *Num `json:"pct"`
	// Source is "bms" (reported), "counted", "uncertain" (counted across a gap or
	// without a known start) or "none".
	Source     string `json:"source"`
	AhIn       Num    `json:"ah_in"`
	AhOut      Num    `json:"ah_out"`
	WhIn       Num    `json:"wh_in"`
	WhOut      Num    `json:"wh_out"`
	ToFullS    *Num   `json:"time_to_full_s"`
	ToEmptyS   *Num   `json:"time_to_empty_s"`
	CapacityAh Num    `json:"capacity_ah"`
}

// Margin is the distance to one limit, signed: positive is inside, negative past it.
type Margin struct {
	Limit   string `json:"limit"` // cell_high, cell_low, spread, deviation, temp_high, temp_low, charge_temp_low, charge_temp_high, temp_rise, temp_spread, charge_current, discharge_current
	Label   string `json:"label"` // "Cell high"
	Unit    string `json:"unit"`
	Value   *Num   `json:"value"` // the measured value compared
	Bound   Num    `json:"bound"` // the limit
	Margin  *Num   `json:"margin"`
	Warn    Num    `json:"warn"`              // warn margin
	State   string `json:"state"`             // ok | warn | trip | nodata
	Subject string `json:"subject,omitempty"` // "cell 7", "sensor 3"
	// ToLimitS is the estimated time to reach the limit at the trend over the
	// last 60 s of data time; nil when not trending toward it.
	ToLimitS *Num `json:"to_limit_s"`
}

// AlarmSnap is one warning or trip in the alarm list.
type AlarmSnap struct {
	ID      uint64 `json:"id"`
	Limit   string `json:"limit"`
	Label   string `json:"label"`
	Subject string `json:"subject,omitempty"`
	Level   string `json:"level"`   // warn | trip | fault
	Since   Num    `json:"since_t"` // data time it began, s since epoch
	Value   *Num   `json:"value"`
	Active  bool   `json:"active"`
	Acked   bool   `json:"acked"`
}

// ValueSnap is one binding's latest reading.
type ValueSnap struct {
	Bind  string `json:"bind"`
	Value *Num   `json:"value"`
	Text  string `json:"text,omitempty"` // enum name or "true"/"false"
	Unit  string `json:"unit,omitempty"`
	Age   *Num   `json:"age_s"`
	State string `json:"state"` // ok | stale | fault | invalid | missing
}

// SourceSnap is one source's health.
type SourceSnap struct {
	Name         string `json:"name"`
	Kind         string `json:"kind"`
	State        string `json:"state"` // connecting | connected | disconnected | stopped | unknown
	Reason       string `json:"reason,omitempty"`
	Age          *Num   `json:"age_s"` // data seconds since its last message
	RateHz       Num    `json:"rate_hz"`
	Messages     uint64 `json:"messages"`
	DecodeErrors uint64 `json:"decode_errors"`
	Unknown      uint64 `json:"unknown"`
	Gaps         uint64 `json:"gaps"`
	// Diagnosis says in words what is wrong when nothing decodes, else "".
	Diagnosis string `json:"diagnosis,omitempty"`
}

// DecodeStats counts decode outcomes for the pack.
type DecodeStats struct {
	Updates uint64 `json:"updates"`
	Errors  uint64 `json:"errors"`
	Faults  uint64 `json:"faults"`
}

// LimitsSnap is the part of the profile the page needs to draw.
type LimitsSnap struct {
	CellLowV  Num  `json:"cell_low_v"`
	CellHighV Num  `json:"cell_high_v"`
	WarnCellV Num  `json:"warn_cell_v"`
	TempLowC  *Num `json:"temp_low_c"`
	TempHighC *Num `json:"temp_high_c"`
	WarnTempC Num  `json:"warn_temp_c"`
}
