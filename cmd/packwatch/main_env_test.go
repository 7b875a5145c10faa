package main

import (
	"os"
	"path/filepath"
	"testing"

	"packwatch/check"
)

// TestMain keeps the tests' pre-flight check history out of the user's
// config folder.
func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "packwatch-cmd-test")
	if err != nil {
		panic(err)
	}
	os.Setenv(check.HistoryEnv, filepath.Join(dir, "checks.db"))
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}
