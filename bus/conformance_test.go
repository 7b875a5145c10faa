//go:build unix

package bus_test

import (
	"testing"

	"packwatch/bus"
	"packwatch/bus/bustest"
)

func mustOpen(t *testing.T, spec bus.Spec) bus.Source {
	t.Helper()
	src, err := bus.Open(spec)
	if err != nil {
		t.Fatal(err)
	}
	return src
}

func TestConformanceSerialText(t *testing.T) {
	bustest.Run(t, bustest.Harness{New: func(t *testing.T) (bus.Source, bustest.Driver) {
		p := newPtyDev(t)
		return mustOpen(t, testSpec(bus.KindSerialText, p.link)), textDriver{p}
	}})
}

func TestConformanceSerialCAN(t *testing.T) {
	bustest.Run(t, bustest.Harness{New: func(t *testing.T) (bus.Source, bustest.Driver) {
		p := newPtyDev(t)
		spec := testSpec(bus.KindSerialCAN, p.link)
		spec.Bitrate = 500000
		return mustOpen(t, spec), slcanDriver{ptyDev: p, openSeq: "C\rS6\rL\r"}
	}})
}

func TestConformanceTCPCAN(t *testing.T) {
	bustest.Run(t, bustest.Harness{New: func(t *testing.T) (bus.Source, bustest.Driver) {
		d := newTCPDriver(t)
		return mustOpen(t, testSpec(bus.KindTCPCAN, d.addr)), d
	}})
}
