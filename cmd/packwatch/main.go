// Command packwatch watches lithium-ion battery packs through their BMS: it
// reads CAN buses and serial consoles, decodes them through a profile, and
// shows the pack on a local web page, records sessions and checks packs
// before use. Run "packwatch help" for the commands.
package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"syscall"
)

// version is set at build time with -ldflags "-X main.version=…".
var version = "0.1.0-dev"

// command is one subcommand.
type command struct {
	summary string
	run     func(ctx context.Context, args []string, stdout, stderr io.Writer) int
}

func commands() map[string]command {
	return map[string]command{
		"validate": {"check a profile and list what it covers", runValidate},
		"decode":   {"decode a capture (or a live source) to JSON lines", runDecode},
		"version":  {"print the version", runVersion},
		"serve":    {"show packs live from their profiles' sources on a local web page", runServe},
		"demo":     {"a simulated pack on the dashboard, no hardware needed", runDemo},
		"record":   {"record a profile's live sources to a file, headless", runRecord},
		"import":   {"turn a capture file into a recording", runImport},
		"replay":   {"play a recording through the dashboard", runReplay},
		"export":   {"export a recording to CSV or JSON lines", runExport},
		"check":    {"pre-flight check: go / no-go for a pack, with a record", runCheck},
		"report":   {"analyse a recording: capacity, knee and cutoff, resistance, bursts", runReport},
		"curve":    {"voltage against amp-hours from a recording, as CSV, SVG or PNG", runCurve},
		"ports": {"list serial ports (with their usb: names) and CAN interfaces", func(_ context.Context, args []string, stdout, stderr io.Writer) int {
			return runPorts(args, stdout, stderr)
		}},
		"simulate": {"drive a device or write a capture from a simulated pack", simulateCtx},
		"help":     {"list the commands", nil},
	}
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		help(stdout)
		return exitOK
	}
	cmds := commands()
	c, ok := cmds[args[0]]
	if !ok || c.run == nil {
		fmt.Fprintf(stderr, "packwatch: unknown command %q\n\n", args[0])
		help(stderr)
		return exitBad
	}
	return c.run(ctx, args[1:], stdout, stderr)
}

func help(w io.Writer) {
	fmt.Fprintln(w, "packwatch: a monitor for lithium-ion battery packs (never their protection).")
	fmt.Fprintln(w, "\nUsage: packwatch COMMAND [flags] [arguments]  (flags may come before or after arguments)")
	fmt.Fprintln(w, "\nCommands:")
	cmds := commands()
	names := make([]string, 0, len(cmds))
	for n := range cmds {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, cmds[n].summary)
	}
	fmt.Fprintln(w, "\nRun packwatch COMMAND -h for a command's flags.")
	fmt.Fprintln(w, "Exit codes: 0 ok, 1 a negative answer (such as no-go), 2 bad input or could not run.")
}

func runVersion(_ context.Context, _ []string, stdout, _ io.Writer) int {
	fmt.Fprintln(stdout, "packwatch", version)
	return exitOK
}
