package config

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
)

// BindKind says what a binding means.
type BindKind uint8

// Binding kinds. Units: V, A, °C, %, kΩ; booleans are 0 or 1.
const (
	BindCellVoltage   BindKind = iota + 1 // cell[N].voltage, V
	BindCellBalancing                     // cell[N].balancing, bool
	BindTemp                              // temp[N], °C
	BindPackCurrent                       // pack.current, A, positive = charging
	BindPackVoltage                       // pack.voltage, V
	BindPackSOC                           // pack.soc, %
	BindPackSOH                           // pack.soh, %
	BindPackSerial                        // pack.serial, a number identifying the pack
	BindIsolation                         // pack.isolation_kohm, kΩ
	BindLinkVoltage                       // link.voltage, V (load side of the main contactor)
	BindStringCurrent                     // string[N].current, A
	BindContactor                         // contactor.main, contactor.negative, contactor.precharge, contactor.main.command (Name holds the part after "contactor.")
	BindChargeEnable                      // charge.enable, bool
	BindInterlock                         // interlock, bool
	BindBMSState                          // bms.state, enum
	BindBMS                               // bms.charge_limit_a, bms.discharge_limit_a, bms.charge_voltage_v, bms.supply_voltage (Name holds the part after "bms.")
	BindCharger                           // charger.voltage, charger.current (Name holds "voltage" or "current")
	BindFault                             // fault.NAME, bool
	BindAux                               // aux.NAME, free number
)

// Binding is a parsed binding name: what a decoded value means.
type Binding struct {
	Kind  BindKind
	Index int    // cell, sensor or string number, from 1; 0 when not indexed
	Name  string // the free part: contactor, bms, charger, fault and aux names
}

// String gives the canonical binding name, e.g. "cell[3].voltage".
func (b Binding) String() string {
	switch b.Kind {
	case BindCellVoltage:
		return fmt.Sprintf("cell[%d].voltage", b.Index)
	case BindCellBalancing:
		return fmt.Sprintf("cell[%d].balancing", b.Index)
	case BindTemp:
		return fmt.Sprintf("temp[%d]", b.Index)
	case BindPackCurrent:
		return "pack.current"
	case BindPackVoltage:
		return "pack.voltage"
	case BindPackSOC:
		return "pack.soc"
	case BindPackSOH:
		return "pack.soh"
	case BindPackSerial:
		return "pack.serial"
	case BindIsolation:
		return "pack.isolation_kohm"
	case BindLinkVoltage:
		return "link.voltage"
	case BindStringCurrent:
		return fmt.Sprintf("string[%d].current", b.Index)
	case BindContactor:
		return "contactor." + b.Name
	case BindChargeEnable:
		return "charge.enable"
	case BindInterlock:
		return "interlock"
	case BindBMSState:
		return "bms.state"
	case BindBMS:
		return "bms." + b.Name
	case BindCharger:
		return "charger." + b.Name
	case BindFault:
		return "fault." + b.Name
	case BindAux:
		return "aux." + b.Name
	}
	return "?"
}

// Unit is the binding's unit as shown ("" for booleans, enums and plain numbers).
func (b Binding) Unit() string {
	switch b.Kind {
	case BindCellVoltage, BindPackVoltage, BindLinkVoltage:
		return "V"
	case BindTemp:
		return "°C"
	case BindPackCurrent, BindStringCurrent:
		return "A"
	case BindPackSOC, BindPackSOH:
		return "%"
	case BindIsolation:
		return "kΩ"
	case BindBMS:
		switch {
		case strings.HasSuffix(b.Name, "_a"):
			return "A"
		case strings.HasSuffix(b.Name, "_v"), b.Name == "supply_voltage":
			return "V"
		}
	case BindCharger:
		if b.Name == "voltage" {
			return "V"
		}
		return "A"
	}
	return ""
}

// Bool reports whether the binding is a flag (non-zero is true).
func (b Binding) Bool() bool {
	switch b.Kind {
	case BindCellBalancing, BindContactor, BindChargeEnable, BindInterlock, BindFault:
		return true
	}
	return false
}

// Indexed reports whether the binding takes a position [N].
func (k BindKind) Indexed() bool {
	return k == BindCellVoltage || k == BindCellBalancing || k == BindTemp || k == BindStringCurrent
}

var fixedBindings = map[string]Binding{
	"pack.current":           {Kind: BindPackCurrent},
	"pack.voltage":           {Kind: BindPackVoltage},
	"pack.soc":               {Kind: BindPackSOC},
	"pack.soh":               {Kind: BindPackSOH},
	"pack.serial":            {Kind: BindPackSerial},
	"pack.isolation_kohm":    {Kind: BindIsolation},
	"link.voltage":           {Kind: BindLinkVoltage},
	"contactor.main":         {Kind: BindContactor, Name: "main"},
	"contactor.main.command": {Kind: BindContactor, Name: "main.command"},
	"contactor.negative":     {Kind: BindContactor, Name: "negative"},
	"contactor.precharge":    {Kind: BindContactor, Name: "precharge"},
	"charge.enable":          {Kind: BindChargeEnable},
	"interlock":              {Kind: BindInterlock},
	"bms.state":              {Kind: BindBMSState},
	"bms.charge_limit_a":     {Kind: BindBMS, Name: "charge_limit_a"},
	"bms.discharge_limit_a":  {Kind: BindBMS, Name: "discharge_limit_a"},
	"bms.charge_voltage_v":   {Kind: BindBMS, Name: "charge_voltage_v"},
	"bms.supply_voltage":     {Kind: BindBMS, Name: "supply_voltage"},
	"charger.voltage":        {Kind: BindCharger, Name: "voltage"},
	"charger.current":        {Kind: BindCharger, Name: "current"},
	"cell[N].voltage":        {Kind: BindCellVoltage},
	"cell[N].balancing":      {Kind: BindCellBalancing},
	"temp[N]":                {Kind: BindTemp},
	"string[N].current":      {Kind: BindStringCurrent},
	"fault.NAME":             {Kind: BindFault},
	"aux.NAME":               {Kind: BindAux},
}

// BindingNames lists every binding form the language knows, for hints.
func BindingNames() []string {
	out := make([]string, 0, len(fixedBindings))
	for k := range fixedBindings {
		out = append(out, k)
	}
	slices.Sort(out)
	return out
}

// ParseBinding parses one concrete binding name (no templates or ranges),
// such as "cell[3].voltage" or "fault.overtemp".
func ParseBinding(s string) (Binding, error) {
	if b, ok := fixedBindings[s]; ok && b.Kind != 0 && !b.Kind.Indexed() && b.Kind != BindFault && b.Kind != BindAux {
		return b, nil
	}
	for _, p := range []struct {
		prefix string
		kind   BindKind
	}{{"fault.", BindFault}, {"aux.", BindAux}} {
		if name, ok := strings.CutPrefix(s, p.prefix); ok {
			if !validName(name) {
				return Binding{}, fmt.Errorf("binding %q: the name after %q must be letters, digits and _", s, p.prefix)
			}
			return Binding{Kind: p.kind, Name: name}, nil
		}
	}
	for _, p := range []struct {
		head, tail string
		kind       BindKind
	}{
		{"cell[", "].voltage", BindCellVoltage},
		{"cell[", "].balancing", BindCellBalancing},
		{"temp[", "]", BindTemp},
		{"string[", "].current", BindStringCurrent},
	} {
		if strings.HasPrefix(s, p.head) && strings.HasSuffix(s, p.tail) && len(s) > len(p.head)+len(p.tail) {
			num := s[len(p.head) : len(s)-len(p.tail)]
			n, err := strconv.Atoi(num)
			if err != nil || n < 1 {
				return Binding{}, fmt.Errorf("binding %q: position %q must be a whole number from 1", s, num)
			}
			return Binding{Kind: p.kind, Index: n}, nil
		}
	}
	return Binding{}, fmt.Errorf("unknown binding %q", s)
}

func validName(s string) bool {
	if s == "" {
		return false
	}
	for _, r := range s {
		if !(r == '_' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9') {
			return false
		}
	}
	return true
}
