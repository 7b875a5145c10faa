package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"os"
	"os/signal"
	"strconv"
	"strings"
	"syscall"
	"time"

	"go.bug.st/serial"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/sim"
)

// simulateUsage is the help text of "packwatch simulate".
const simulateUsage = `Usage: packwatch simulate --profile FILE --to TARGET [--for D] [--speed N|max]
       [--scenario NAME|FILE] [--fault KIND[:N|:SOURCE][@AFTER]]... [--rate N]

Simulates the pack a profile describes and sends its frames and console lines,
encoded through that same profile, to TARGET:
  capture:FILE          a capture file (FILE "-" is standard output)
  serial-text:DEVICE    console lines on a serial port (CR LF ended)
  serial-can:DEVICE     frames as ASCII serial-line CAN on a serial port
  tcp-can:ADDR          16-byte frames to every client that connects to ADDR
                        (a tcp-can source with device = ADDR dials it)
Without --scenario the story comes from the profile's [pack] and [limits]:
rest, charge, discharge with bursts, and again. Built-in scenarios: generic,
buoy-winch. The data is invented: never use it to judge a real pack.

Faults: cell-high, weak-cell, sensor-stop, hot-sensor, silent, contactor-stuck,
garbage, fault-flag, low-soc; e.g. --fault weak-cell:7 --fault sensor-stop:2@5m.

Flags:`

// runSimulate is "packwatch simulate": it stops on Ctrl-C or SIGTERM.
func runSimulate(args []string, stdout, stderr io.Writer) int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	return simulateCtx(ctx, args, stdout, stderr)
}

// simulateCtx is "packwatch simulate" under a context, in the command
// table's form.
func simulateCtx(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("simulate", stderr)
	profile := fs.String("profile", "", "the profile `FILE` to simulate")
	to := fs.String("to", "", "where the data goes: capture:FILE, serial-text:DEVICE, serial-can:DEVICE or tcp-can:ADDR")
	forD := fs.Duration("for", 0, "simulated time to run (default: one pass of the story for capture, until Ctrl-C for devices)")
	speedS := fs.String("speed", "", "simulated seconds per real second, or max (default: max for capture, else the story in about 10 minutes)")
	scenario := fs.String("scenario", "", "scenario `NAME` (generic, buoy-winch) or FILE (default: generic)")
	var faults listFlag
	fs.Var(&faults, "fault", "put a `FAULT` into the data (repeatable)")
	rate := fs.Float64("rate", 0, "send `N` messages per second of wall time, repeating the story's frames, for load tests (--speed is then ignored; --for counts sending time)")
	seed := fs.Uint64("seed", 1, "seed for the cells' spread and garbage bytes; the same seed gives the same data")
	startS := fs.String("start", "", "data time of the start, RFC 3339 (default: now)")
	srcName := fs.String("source", "", "the profile's source `NAME` whose data goes to a device target (default: the first of the target's kind)")
	baud := fs.Int("baud", 0, "serial baud rate (default: the source's, else 115200)")
	force := fs.Bool("force", false, "overwrite an existing capture file")
	fs.Usage = func() {
		fmt.Fprintln(stderr, simulateUsage)
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) > 0 {
		fmt.Fprintf(stderr, "simulate: unexpected argument %q\n", pos[0])
		return exitBad
	}
	if err := simulate(ctx, simulateArgs{profile: *profile, to: *to, forD: *forD, speed: *speedS, scenario: *scenario,
		faults: faults, rate: *rate, seed: *seed, start: *startS, source: *srcName, baud: *baud, force: *force}, stdout, stderr); err != nil {
		fmt.Fprintln(stderr, "simulate:", err)
		return exitBad
	}
	return exitOK
}

type simulateArgs struct {
	profile, to, speed, scenario, start, source string
	forD                                        time.Duration
	faults                                      []string
	rate                                        float64
	seed                                        uint64
	baud                                        int
	force                                       bool
}

func simulate(ctx context.Context, a simulateArgs, stdout, stderr io.Writer) error {
	p, m, err := loadProfile(a.profile, stderr)
	if err != nil {
		return err
	}
	kind, dest, ok := strings.Cut(a.to, ":")
	if a.to == "" || !ok || dest == "" {
		return usagef("--to TARGET is required: capture:FILE, serial-text:DEVICE, serial-can:DEVICE or tcp-can:ADDR")
	}
	opt := sim.Options{Seed: a.seed, For: a.forD}
	switch a.speed {
	case "":
		if kind == "capture" {
			opt.Speed = sim.SpeedMax
		}
	case "max":
		opt.Speed = sim.SpeedMax
	default:
		v, err := strconv.ParseFloat(a.speed, 64)
		if err != nil || !(v > 0) || math.IsInf(v, 0) {
			return usagef("--speed %q: a number above 0, or max", a.speed)
		}
		opt.Speed = v
	}
	if a.rate < 0 || math.IsNaN(a.rate) || math.IsInf(a.rate, 0) {
		return usagef("--rate %g: a number of messages per second above 0", a.rate)
	}
	if a.rate > 0 {
		// the story runs as fast as it can; the target sink paces the frames
		opt.Speed, opt.For = sim.SpeedMax, 0
	}
	opt.Start = time.Now().UTC().Truncate(time.Second)
	if a.start != "" {
		if opt.Start, err = time.Parse(time.RFC3339Nano, a.start); err != nil {
			return usagef("--start %q: want RFC 3339 such as 2026-05-01T08:00:00Z", a.start)
		}
	}
	if opt.Scenario, err = sim.LoadScenario(a.scenario, p); err != nil {
		return err
	}
	for _, s := range a.faults {
		f, err := sim.ParseFault(s)
		if err != nil {
			return usagef("--fault: %v", err)
		}
		opt.Faults = append(opt.Faults, f)
	}
	s, err := sim.New(m, opt)
	if err != nil {
		return err
	}
	for _, w := range s.Warnings() {
		fmt.Fprintln(stderr, "simulate: warning:", w)
	}
	if opt.For == 0 && kind == "capture" && a.rate == 0 {
		opt.For = s.StoryLength()
		if s, err = sim.New(m, opt); err != nil {
			return err
		}
	}

	names := make([]string, len(p.Sources))
	for i, src := range p.Sources {
		names[i] = src.Name
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	topt := sim.TargetOptions{Names: names, Start: opt.Start.UnixNano(), Rate: a.rate, Stop: cancel, Ctx: ctx}
	if a.rate > 0 {
		topt.For = a.forD
		if kind == "capture" {
			// a file needs no pacing: the restamped times say the rate
			var virtual time.Time
			topt.Now = func() time.Time { return virtual }
			topt.Sleep = func(_ context.Context, d time.Duration) error { virtual = virtual.Add(d); return nil }
		}
	}
	var w io.Writer
	var closeTarget func() error
	switch kind {
	case "capture":
		topt.Format = sim.FormatCapture
		if dest == "-" {
			bw := bufio.NewWriterSize(stdout, 64<<10)
			w, closeTarget = bw, bw.Flush
			break
		}
		flags := os.O_WRONLY | os.O_CREATE | os.O_EXCL
		if a.force {
			flags = os.O_WRONLY | os.O_CREATE | os.O_TRUNC
		}
		f, err := os.OpenFile(dest, flags, 0o644)
		if errors.Is(err, os.ErrExist) {
			return fmt.Errorf("capture %s exists; use --force to overwrite it", dest)
		}
		if err != nil {
			return fmt.Errorf("create capture: %w", err)
		}
		bw := bufio.NewWriterSize(f, 256<<10)
		w, closeTarget = bw, func() error {
			err := bw.Flush()
			if cerr := f.Close(); err == nil {
				err = cerr
			}
			return err
		}
	case "serial-text", "serial-can":
		topt.Format = sim.FormatText
		if kind == "serial-can" {
			topt.Format = sim.FormatSLCAN
		}
		src, err := pickSource(p, a.source, kind == "serial-can")
		if err != nil {
			return err
		}
		topt.Sources = []uint16{uint16(src)}
		b := a.baud
		if b == 0 {
			b = p.Sources[src].Baud
		}
		if b == 0 {
			b = 115200
		}
		mode, err := serialModeOf(p.Sources[src], b)
		if err != nil {
			return err
		}
		port, err := serial.Open(dest, mode)
		if err != nil {
			return fmt.Errorf("open %s: %w", dest, err)
		}
		drained := drainPort(ctx, port)
		w, closeTarget = port, func() error {
			cancel()
			<-drained
			return port.Close()
		}
		fmt.Fprintf(stdout, "sending source %q to %s at %d baud\n", p.Sources[src].Name, dest, b)
	case "tcp-can":
		topt.Format = sim.FormatFrame16
		src, err := pickSource(p, a.source, true)
		if err != nil {
			return err
		}
		topt.Sources = []uint16{uint16(src)}
		ln, err := net.Listen("tcp", dest)
		if err != nil {
			return fmt.Errorf("listen %s: %w", dest, err)
		}
		bc := sim.NewBroadcaster(ln, 0)
		w, closeTarget = bc, bc.Close
		fmt.Fprintf(stdout, "serving source %q as 16-byte frames on %s; waiting for a client (a tcp-can source with device = %q)\n",
			p.Sources[src].Name, ln.Addr(), ln.Addr().String())
		if err := bc.WaitClient(ctx); err != nil {
			bc.Close()
			return nil // interrupted before anyone connected
		}
	default:
		return usagef("--to %q: the target kind must be capture, serial-text, serial-can or tcp-can", a.to)
	}

	ts := sim.NewTargetSink(w, topt)
	speed := "as fast as it can"
	if !math.IsInf(s.Speed(), 1) {
		speed = fmt.Sprintf("%.4g× real time", s.Speed())
	}
	if a.rate > 0 {
		speed = fmt.Sprintf("%g messages/s", a.rate)
	}
	fmt.Fprintf(stdout, "SIMULATED data of %q (scenario %s), %s; invented, not a real pack.\n", p.Pack.Name, s.Scenario().Name, speed)
	began := time.Now()
	runErr := s.Run(ctx, ts)
	closeErr := closeTarget()
	if err := errors.Join(runErr, ts.Err()); err != nil {
		return err
	}
	if closeErr != nil {
		return fmt.Errorf("close %s: %w", a.to, closeErr)
	}
	st := s.State()
	fmt.Fprintf(stdout, "wrote %d messages to %s: %v of simulated time in %v\n",
		ts.Written(), a.to, st.Elapsed.Round(time.Millisecond), time.Since(began).Round(time.Millisecond))
	return nil
}

// pickSource finds the source whose data goes to a device target: by name,
// or the first source of the right kind.
func pickSource(p *config.Profile, name string, canKind bool) (int, error) {
	for i, src := range p.Sources {
		isCAN := src.Kind != "serial-text"
		if name != "" && src.Name == name {
			if isCAN != canKind {
				return 0, usagef("--source %q is a %s source; this target carries %s", name, src.Kind, map[bool]string{true: "CAN frames", false: "console lines"}[canKind])
			}
			return i, nil
		}
		if name == "" && isCAN == canKind {
			return i, nil
		}
	}
	if name != "" {
		return 0, usagef("--source %q: the profile has no such source", name)
	}
	return 0, usagef("the profile has no %s source for this target", map[bool]string{true: "CAN", false: "serial-text"}[canKind])
}

// drainPort reads and discards what the other end writes (an adapter's open
// sequence, console commands) so that its buffer never fills, until ctx
// ends. The returned channel closes when the reader has stopped.
func drainPort(ctx context.Context, port serial.Port) <-chan struct{} {
	done := make(chan struct{})
	_ = port.SetReadTimeout(100 * time.Millisecond)
	go func() {
		defer close(done)
		buf := make([]byte, 4096)
		for ctx.Err() == nil {
			if _, err := port.Read(buf); err != nil {
				return
			}
		}
	}()
	return done
}

// serialModeOf takes a source's line settings (data bits, parity, stop
// bits; defaults 8N1) for the simulated end of the line.
func serialModeOf(src config.Source, baud int) (*serial.Mode, error) {
	m, err := bus.SerialMode(baud, src.DataBits, src.Parity, src.StopBits)
	if err != nil {
		return nil, fmt.Errorf("source %s: %w", src.Name, err)
	}
	return m, nil
}
