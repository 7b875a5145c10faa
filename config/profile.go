package config

// Profile is one pack's profile as written in TOML: what the pack is, where
// its protection trips, where its data comes from and how to read each frame
// and console line. Load parses and validates it; decode.Compile turns it into
// the per-frame decoder.
type Profile struct {
	Pack    Pack     `toml:"pack"`
	Limits  Limits   `toml:"limits"`
	Warn    Warn     `toml:"warn"`
	Alarm   Alarm    `toml:"alarm"`
	SOC     SOC      `toml:"soc"`
	Check   Check    `toml:"check"`
	Sensors []Sensor `toml:"sensor"`
	Sources []Source `toml:"source"`
	Frames  []Frame  `toml:"frame"`
	Lines   []Line   `toml:"line"`

	// File is the path the profile was read from ("" for one built in code).
	File string `toml:"-"`
	// Hash is the hex SHA-256 of the file's bytes.
	Hash string `toml:"-"`
	// Text is the file's content as read.
	Text string `toml:"-"`
	// Warnings are problems that do not stop the profile from loading.
	Warnings []*Problem `toml:"-"`
	// Source text positions of keys, for errors found after parsing.
	pos positions
	exp *Expanded
}

// Pack describes the pack itself.
type Pack struct {
	Name       string  `toml:"name"`
	Cells      int     `toml:"cells"`
	Sensors    int     `toml:"temp_sensors"`
	CapacityAh float64 `toml:"capacity_ah"`
	// Chemistry selects the rest-voltage table: "nmc" (default), "lfp", "lco", "nca".
	Chemistry string `toml:"chemistry"`
	// Serial is a fixed pack identifier, used when the BMS does not report pack.serial.
	Serial string `toml:"serial"`
}

// Limits are where the pack's own protection trips. Optional limits are nil
// when absent: no trip is checked for them.
type Limits struct {
	CellHighV        float64  `toml:"cell_high_v"`
	CellLowV         float64  `toml:"cell_low_v"`
	SpreadV          *float64 `toml:"spread_v"`
	DeviationV       *float64 `toml:"deviation_v"`
	TempHighC        *float64 `toml:"temp_high_c"`
	TempLowC         *float64 `toml:"temp_low_c"`
	ChargeTempLowC   *float64 `toml:"charge_temp_low_c"`
	ChargeTempHighC  *float64 `toml:"charge_temp_high_c"`
	TempRiseCPerMin  *float64 `toml:"temp_rise_c_per_min"`
	TempSpreadC      *float64 `toml:"temp_spread_c"`
	DischargeCurrent *float64 `toml:"discharge_current_a"`
	ChargeCurrent    *float64 `toml:"charge_current_a"`
}

// Warn gives how near a limit counts as a warning, in the limit's unit.
// Nil values take defaults (see Defaults in the README).
type Warn struct {
	CellV    *float64 `toml:"cell_v"`
	SpreadV  *float64 `toml:"spread_v"`
	TempC    *float64 `toml:"temp_c"`
	CurrentA *float64 `toml:"current_a"`
}

// Alarm holds the time rules of trips.
type Alarm struct {
	TripAfterMs  *int64 `toml:"trip_after_ms"`
	ClearAfterMs *int64 `toml:"clear_after_ms"`
}

// SOC configures charge counting.
type SOC struct {
	// Start is "rest", "full", "bms" or a number in percent.
	Start            any      `toml:"start"`
	CurrentDeadbandA *float64 `toml:"current_deadband_a"`
	ChargeEfficiency *float64 `toml:"charge_efficiency"`
}

// Check is the pre-flight check section. Nil values take defaults from the limits.
type Check struct {
	MinSOCPct       *float64 `toml:"min_soc_pct"`
	MinCellMarginV  *float64 `toml:"min_cell_margin_v"`
	MaxSpreadV      *float64 `toml:"max_spread_v"`
	MaxRestCurrentA *float64 `toml:"max_rest_current_a"`
	TempLowC        *float64 `toml:"temp_low_c"`
	TempHighC       *float64 `toml:"temp_high_c"`
	MinRateHz       *float64 `toml:"min_rate_hz"`
	Manual          []string `toml:"manual"`
}

// Sensor describes one temperature sensor.
type Sensor struct {
	N    int    `toml:"n"`
	Role string `toml:"role"` // cell | busbar | ambient | coolant
	Name string `toml:"name"`
}

// Source is one place data comes from.
type Source struct {
	Name     string `toml:"name"`
	Kind     string `toml:"kind"` // socketcan | serial-can | serial-text | tcp-can
	Device   string `toml:"device"`
	Baud     int    `toml:"baud"`
	DataBits int    `toml:"data_bits"`
	Parity   string `toml:"parity"`    // none | even | odd | mark | space
	StopBits string `toml:"stop_bits"` // "1" | "1.5" | "2"
	Bitrate  int    `toml:"bitrate"`
	Mode     string `toml:"mode"` // listen (default) | normal
}

// Mux selects which field set of a frame applies, from a few bits of the frame.
type Mux struct {
	Byte  int    `toml:"byte"`
	Bit   *int   `toml:"bit"`
	Bits  int    `toml:"bits"`
	Size  int    `toml:"size"`
	Order string `toml:"order"`
}

// Frame describes one CAN frame (or a range of IDs sharing a layout).
type Frame struct {
	// ID is an integer, or a string "0x500" or a range "0x500..0x50F".
	ID       any     `toml:"id"`
	Extended *bool   `toml:"extended"`
	Source   string  `toml:"source"`
	Mux      *Mux    `toml:"mux"`
	PeriodMs int64   `toml:"period_ms"`
	Name     string  `toml:"name"`
	Fields   []Field `toml:"field"`
}

// Field describes one value (or a range of values) in a frame or line.
type Field struct {
	Bind   string `toml:"bind"`
	Byte   *int   `toml:"byte"`
	Bit    *int   `toml:"bit"`
	Bits   int    `toml:"bits"`
	Size   int    `toml:"size"`
	Order  string `toml:"order"`
	Signed bool   `toml:"signed"`
	Float  bool   `toml:"float"`
	// Mux is a value or a range "0..3" of mux values this field applies to.
	Mux       any               `toml:"mux"`
	Scale     *float64          `toml:"scale"`
	Offset    float64           `toml:"offset"`
	Unit      string            `toml:"unit"`
	Invalid   []int64           `toml:"invalid"`
	Range     []float64         `toml:"range"`
	Enum      map[string]string `toml:"enum"`
	PeriodMs  int64             `toml:"period_ms"`
	Group     string            `toml:"group"`
	IndexBase *int              `toml:"index_base"`
}

// Line describes console lines matched by an RE2 pattern.
type Line struct {
	Source   string  `toml:"source"`
	Pattern  string  `toml:"pattern"`
	PeriodMs int64   `toml:"period_ms"`
	Fields   []Field `toml:"field"`
}
