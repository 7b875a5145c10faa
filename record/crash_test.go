package record

import (
	"bufio"
	"context"
	"database/sql"
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

// crashChildEnv holds the file the crash test's child records into.
const crashChildEnv = "PACKWATCH_RECORD_CRASH_CHILD"

const crashBatch = 8

// crashChild records frame i carrying i (data time = wall time) at about
// 8,000 frames/s, a saturated bus, and after each batch prints
// "<last frame index> <its data time> <messages committed>". It runs until
// killed (or 30 s as a safety net), and stops at once if recording fails.
func crashChild() int {
	path := os.Getenv(crashChildEnv)
	w, err := Create(path, Meta{Tool: "packwatch", Version: "crash-test", Mode: "live"}, Options{})
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 2
	}
	batch := make([]bus.Message, crashBatch)
	end := time.Now().Add(30 * time.Second)
	for i := 0; time.Now().Before(end); {
		if err := w.Err(); err != nil {
			fmt.Fprintln(os.Stderr, "crash child:", err)
			return 3
		}
		for j := range batch {
			batch[j] = bus.Message{T: time.Now().UnixNano(), Kind: bus.KindCAN,
				Frame: can.Frame{ID: 0x100 + uint32(i%4), Length: 8}}
			binary.LittleEndian.PutUint64(batch[j].Frame.Data[:], uint64(i))
			i++
		}
		w.Write(batch)
		k, _ := w.Committed()
		fmt.Fprintf(os.Stdout, "%d %d %d\n", i-1, batch[crashBatch-1].T, k)
		time.Sleep(time.Millisecond)
	}
	w.Close()
	return 0
}

// TestCrash kills a recording child with SIGKILL at seeded points (after it
// reports k frames committed and w frames written) and checks the file:
// PRAGMA integrity_check passes, it holds a complete prefix of what was
// written including everything reported committed, at most 0.5 s of data
// time is lost, and the next open notes the recovery. SQLite's WAL keeps
// committed transactions through an application crash ("Write-Ahead
// Logging", "PRAGMA synchronous", sqlite.org).
func TestCrash(t *testing.T) {
	if runtime.GOOS == "js" || runtime.GOOS == "wasip1" {
		// Process.Kill is SIGKILL on Unix and TerminateProcess on Windows;
		// these targets cannot start a child at all.
		if os.Getenv("PACKWATCH_NO_SKIP") == "1" {
			t.Fatal("the crash test needs a child process, not available on " + runtime.GOOS)
		}
		t.Skip("the crash test needs a child process, not available on " + runtime.GOOS)
	}
	trials := 20
	if testing.Short() {
		trials = 5
	}
	for trial := range trials {
		rng := rand.New(rand.NewPCG(uint64(trial), 0xC0FFEE))
		k := 1 + rng.IntN(3000)
		wn := k + rng.IntN(2400)
		t.Run(fmt.Sprintf("trial%02d_k%d_w%d", trial, k, wn), func(t *testing.T) {
			crashTrial(t, k, wn)
		})
	}
}

func crashTrial(t *testing.T, killCommitted, killWritten int) {
	path := filepath.Join(t.TempDir(), "crash.db")
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), crashChildEnv+"="+path)
	cmd.Stderr = os.Stderr
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	var lastI, lastT, committed int64 = -1, 0, 0
	killed := false
	sc := bufio.NewScanner(out)
	for sc.Scan() {
		var i, tt, k int64
		if _, err := fmt.Sscan(sc.Text(), &i, &tt, &k); err != nil {
			t.Fatalf("child said %q: %v", sc.Text(), err)
		}
		lastI, lastT, committed = i, tt, k
		if !killed && k >= int64(killCommitted) && i+1 >= int64(killWritten) {
			if err := cmd.Process.Kill(); err != nil { // SIGKILL
				t.Fatal(err)
			}
			killed = true
		}
	}
	werr := cmd.Wait()
	if !killed {
		t.Fatalf("child ended before the kill point (last frame %d, %d committed): %v", lastI, committed, werr)
	}

	// Integrity, read-only so that nothing is checkpointed before Open.
	db, err := sql.Open("sqlite", dsn(path, "ro", nil))
	if err != nil {
		t.Fatal(err)
	}
	var ic string
	if err := db.QueryRow("PRAGMA integrity_check").Scan(&ic); err != nil || ic != "ok" {
		t.Fatalf("integrity_check: %q %v", ic, err)
	}
	db.Close()

	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if ev := r.Recovered(); ev == nil || ev.Kind != EventRecovery {
		t.Errorf("no recovery noted: %+v", ev)
	}
	var n int64
	var lastRec int64
	err = r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func(b []bus.Message) error {
		for _, m := range b {
			if got := int64(binary.LittleEndian.Uint64(m.Frame.Data[:])); got != n || m.Frame.ID != 0x100+uint32(n%4) {
				return fmt.Errorf("message %d carries %d (ID %#x): not a prefix", n, got, m.Frame.ID)
			}
			n++
			lastRec = m.T
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if n < committed {
		t.Errorf("%d frames in the file, but %d were reported committed", n, committed)
	}
	if n > lastI+1+crashBatch {
		t.Errorf("%d frames in the file, only %d written", n, lastI+1)
	}
	lost := time.Duration(lastT - lastRec)
	if n == 0 {
		lost = time.Duration(math.MaxInt64)
	}
	t.Logf("written %d, committed %d reported, %d in file, lost %v of data time", lastI+1, committed, n, lost)
	if lost > 500*time.Millisecond {
		t.Errorf("lost %v of data time, more than 0.5 s", lost)
	}
}
