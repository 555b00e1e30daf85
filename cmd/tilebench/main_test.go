package main

import (
	"bytes"
	"strings"
	"testing"
)

// runCLI runs one command line in-process and returns its exit status and
// output streams.
func runCLI(t *testing.T, stdin string, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	ctx := &runContext{stdin: strings.NewReader(stdin), stdout: &out, stderr: &errb}
	code = run(ctx, args)
	return code, out.String(), errb.String()
}

func TestUnknownCommandIsUsageError(t *testing.T) {
	code, _, stderr := runCLI(t, "", "frobnicate")
	if code != 2 {
		t.Fatalf("exit %d, want 2", code)
	}
	if strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, "frobnicate") {
		t.Fatalf("stderr %q: want one line naming the command", stderr)
	}
}
