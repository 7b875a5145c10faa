package pack

import (
	"testing"

	"go.uber.org/goleak"
)

// The engine starts no goroutines; the concurrency test does and must end them.
func TestMain(m *testing.M) {
	goleak.VerifyTestMain(m)
}
