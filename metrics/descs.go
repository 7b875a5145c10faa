package metrics

import (
	"strings"

	"github.com/prometheus/client_golang/prometheus"
)

// Label names.
const (
	lPack   = "pack"
	lCell   = "cell"
	lSensor = "sensor"
	lSource = "source"
	lLimit  = "limit"
	lState  = "state"
)

// States a pack and a limit can be in (pack.Level's names), exposed as one
// 0/1 series each.
var levelStates = []string{"ok", "warn", "trip", "nodata"}

// socBases are the values of SOCSnap.Source.
var socBases = []string{"bms", "counted", "uncertain", "none"}

// unitName maps a limit's unit as the snapshot gives it to the suffix of its
// metric names and the factor to that base unit.
type unitName struct {
	suffix string
	factor float64
}

var limitUnits = map[string]unitName{
	"V":      {"volts", 1},
	"°C":     {"celsius", 1},
	"°C/min": {"celsius_per_second", 1.0 / 60},
	"A":      {"amperes", 1},
}

// descs are the descriptions of every metric family, made once per Handler.
type descs struct {
	info, snapshots, dataTime *prometheus.Desc

	packInfo, packState, cellsReporting                *prometheus.Desc
	cellVolts, cellBalancing, tempC                    *prometheus.Desc
	current, voltage, power                            *prometheus.Desc
	socRatio, socBasis, charge, energy, toFull, toEmpt *prometheus.Desc
	cellLowest, cellHighest, curLowest, curHighest     *prometheus.Desc
	limitState, toLimit, trips, faults                 *prometheus.Desc
	alarmsActive, alarmsUnacked, decodeFaults          *prometheus.Desc
	margin, bound                                      map[string]*prometheus.Desc // by unit suffix

	srcInfo, srcConnected, srcAge, srcMessages, srcErrors, srcUnknown, srcGaps *prometheus.Desc
}

func newDescs() *descs {
	d := func(name, help string, labels ...string) *prometheus.Desc {
		var opts []prometheus.DescOpt
		if u := unitOf(name); u != "" {
			opts = append(opts, prometheus.WithUnit(u))
		}
		return prometheus.V2.NewDesc("packwatch_"+name, help, prometheus.UnconstrainedLabels(labels), nil, opts...)
	}
	pk := []string{lPack}
	src := []string{lPack, lSource}
	x := &descs{
		info:      d("info", "Always 1; labels give the data mode (live, simulated, replay) and the packwatch version.", "mode", "version"),
		snapshots: d("snapshots_total", "Snapshots the engine has built (the sequence number of the one exposed; /api/state gives it as seq).", nil...),
		dataTime:  d("data_time_seconds", "Data time of the exposed snapshot, seconds since the Unix epoch. Live, it stops advancing when every source is silent.", nil...),

		packInfo:       d("pack_info", "Always 1; labels give the pack's name and serial.", lPack, "name", "serial"),
		packState:      d("pack_state", "1 for the pack's state (the worst of its margins and alarms), 0 for the others.", lPack, lState),
		cellsReporting: d("cells_reporting", "Cells with a fresh reading.", pk...),
		cellVolts:      d("cell_voltage_volts", "Cell voltage. Absent while the reading is stale, missing or faulty.", lPack, lCell),
		cellBalancing:  d("cell_balancing", "1 while the cell is being balanced, 0 when not; absent when not reported or stale.", lPack, lCell),
		tempC:          d("temperature_celsius", "Temperature sensor reading. Absent while stale, missing or faulty.", lPack, lSensor, "role"),
		current:        d("pack_current_amperes", "Pack current, positive = charging. Absent while stale.", pk...),
		voltage:        d("pack_voltage_volts", "Pack voltage as reported, else the sum of the cells when every cell is fresh.", pk...),
		power:          d("pack_power_watts", "Pack power, positive = charging.", pk...),
		socRatio:       d("state_of_charge_ratio", "State of charge, 0 to 1. Absent while the BMS's value is stale, or while the current is stale when it is counted.", pk...),
		socBasis:       d("state_of_charge_basis", "1 for where the state of charge comes from (bms, counted, uncertain, none), 0 for the others.", lPack, "basis"),
		charge:         d("charge_coulombs_total", "Charge counted into (direction=in) and out of (out) the pack since the counter started; 1 Ah = 3600 C.", lPack, "direction"),
		energy:         d("energy_joules_total", "Energy counted into (direction=in) and out of (out) the pack since the counter started; 1 Wh = 3600 J.", lPack, "direction"),
		toFull:         d("time_to_full_seconds", "Estimated time to full at the present charging current.", pk...),
		toEmpt:         d("time_to_empty_seconds", "Estimated time to empty at the present discharging current.", pk...),
		cellLowest:     d("cell_voltage_lowest_volts", "Lowest fresh cell voltage since this scraper's previous scrape, sampled every hub tick (100 ms).", pk...),
		cellHighest:    d("cell_voltage_highest_volts", "Highest fresh cell voltage since this scraper's previous scrape, sampled every hub tick (100 ms).", pk...),
		curLowest:      d("pack_current_lowest_amperes", "Lowest pack current (the strongest discharge, negative) since this scraper's previous scrape, sampled every hub tick (100 ms).", pk...),
		curHighest:     d("pack_current_highest_amperes", "Highest pack current (the strongest charge) since this scraper's previous scrape, sampled every hub tick (100 ms).", pk...),
		limitState:     d("limit_state", "1 for the state of the check of each limit the profile sets, 0 for the others.", lPack, lLimit, lState),
		toLimit:        d("limit_time_to_limit_seconds", "Estimated time until the value reaches the limit at the trend of the last 60 s; absent when not trending toward it.", lPack, lLimit),
		trips:          d("trips_total", "Trips of each limit, counted from the alarm list at every hub tick since packwatch started.", lPack, lLimit),
		faults:         d("sensor_faults_total", "Sensor faults (implausible readings raising an alarm) since packwatch started.", pk...),
		alarmsActive:   d("alarms_active", "Alarms now active, by level (trip, fault).", lPack, "level"),
		alarmsUnacked:  d("alarms_unacknowledged", "Alarms in the list not yet acknowledged.", pk...),
		decodeFaults:   d("decode_faults_total", "Readings outside their plausible range, shown as sensor faults.", pk...),
		margin:         map[string]*prometheus.Desc{},
		bound:          map[string]*prometheus.Desc{},

		srcInfo:      d("source_info", "Always 1; labels give the source's kind.", lPack, lSource, "kind"),
		srcConnected: d("source_connected", "1 while the source is connected, 0 otherwise; absent when its state is unknown (replay, capture).", src...),
		srcAge:       d("source_last_message_age_seconds", "Data seconds since the source's last message.", src...),
		srcMessages:  d("source_messages_total", "Messages received from the source.", src...),
		srcErrors:    d("source_decode_errors_total", "Messages from the source that failed to decode.", src...),
		srcUnknown:   d("source_unknown_ids_total", "Messages from the source with an ID or line the profile does not describe.", src...),
		srcGaps:      d("source_gaps_total", "Breaks in the source's data (reconnect, suspend, clock step).", src...),
	}
	for _, u := range limitUnits {
		x.margin[u.suffix] = d("limit_margin_"+u.suffix,
			"Distance of the measured value to the limit, positive inside, negative past it. Absent without a valid value.", lPack, lLimit)
		x.bound[u.suffix] = d("limit_bound_"+u.suffix,
			"The limit itself, from the profile (the discharge current limit is negative).", lPack, lLimit)
	}
	return x
}

// baseUnits are the units metric names end in (before _total), longest
// first so that celsius_per_second is not taken for seconds.
var baseUnits = []string{"celsius_per_second", "coulombs", "joules", "volts", "amperes", "celsius", "watts", "seconds", "ratio"}

// unitOf gives the unit a metric name ends in, for OpenMetrics' UNIT
// line (the name must end in it), or "" for a dimensionless metric.
func unitOf(name string) string {
	base := strings.TrimSuffix(name, "_total")
	for _, u := range baseUnits {
		if strings.HasSuffix(base, "_"+u) {
			return u
		}
	}
	return ""
}
