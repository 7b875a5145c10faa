package bus_test

import (
	"fmt"
	"strings"

	"go.einride.tech/can"

	"packwatch/bus"
)

func ExampleParseSLCAN() {
	f, ts, hasTS, err := bus.ParseSLCAN([]byte("t45631122331F40"))
	if err != nil {
		panic(err)
	}
	fmt.Printf("ID %#x, %d bytes % X, timestamp %d ms (%v)\n", f.ID, f.Length, f.Data[:f.Length], ts, hasTS)
	// Output: ID 0x456, 3 bytes 11 22 33, timestamp 8000 ms (true)
}

func ExampleAppendSLCAN() {
	line := bus.AppendSLCAN(nil, can.Frame{ID: 0x12ABCDEF, IsExtended: true, Length: 2, Data: can.Data{0xAA, 0x55}})
	fmt.Printf("%q\n", line)
	// Output: "T12ABCDEF2AA55\r"
}

func ExampleLineScanner() {
	sc := bus.NewLineScanner(strings.NewReader("cell 1: 3712 mV\r\ncell 2: 3709 mV\n\x1b[31mfault: none\x1b[0m\r"))
	for sc.Scan() {
		fmt.Println(sc.Text())
	}
	// Output:
	// cell 1: 3712 mV
	// cell 2: 3709 mV
	// fault: none
}
