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

// No command is a usage error (exit 2, help on stderr); asking for help
// is not (exit 0, help on stdout).
func TestNoCommandIsUsageError(t *testing.T) {
	code, stdout, stderr := runCLI(t, "")
	if code != 2 || stdout != "" || !strings.Contains(stderr, "commands:") {
		t.Fatalf("no command: exit %d, stdout %q, stderr %q", code, stdout, stderr)
	}
	for _, h := range []string{"help", "-h", "--help", "-help"} {
		code, stdout, stderr := runCLI(t, "", h)
		if code != 0 || stderr != "" || !strings.Contains(stdout, "commands:") {
			t.Fatalf("%s: exit %d, stdout %q, stderr %q", h, code, stdout, stderr)
		}
	}
}
