package record

import (
	"os"
	"testing"

	"go.uber.org/goleak"
)

func TestMain(m *testing.M) {
	if os.Getenv(crashChildEnv) != "" {
		os.Exit(crashChild())
	}
	goleak.VerifyTestMain(m)
}
