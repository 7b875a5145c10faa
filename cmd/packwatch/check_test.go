package main

import (
	"bytes"
	"context"
	"path/filepath"
	"testing"
)

func runCheckCLI(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	args = append(args, "--history", filepath.Join(t.TempDir(), "checks.db"))
	code := runCheck(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

func TestCheckExampleCapture(t *testing.T) {
	code, out, errOut := runCheckCLI(t, "--profile", "../../config/examples/buoy-winch.toml", "--input", "../../bus/testdata/example.capture")
	t.Logf("code %d\n%s\n%s", code, out, errOut)
}
