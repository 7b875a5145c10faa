//go:build unix

package bus_test

import (
	"os"
	"testing"

	"go.uber.org/goleak"
)

// noSkip reports whether skips that CI can avoid must fail instead.
func noSkip() bool { return os.Getenv("PACKWATCH_NO_SKIP") == "1" }

// skipOrFail skips with the reason, or fails it when PACKWATCH_NO_SKIP=1.
func skipOrFail(t *testing.T, reason string) {
	t.Helper()
	if noSkip() {
		t.Fatal(reason + " (PACKWATCH_NO_SKIP=1)")
	}
	t.Skip(reason)
}

func TestMain(m *testing.M) {
	if os.Getenv(writerEnv) != "" {
		os.Exit(tcpWriterChild())
	}
	goleak.VerifyTestMain(m)
}
