package main

import (
	"fmt"
	"image/png"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/vision"
	"tilebench/vision/policies"
	"tilebench/vision/remote"
	"tilebench/vision/study"
)

// serveEnv, when set, makes the test binary an external policy (the
// zeroPolicy over the protocol on stdin/stdout) instead of running tests.
const serveEnv = "TILEBENCH_TEST_SERVE_POLICY"

func TestMain(m *testing.M) {
	if os.Getenv(serveEnv) == "1" {
		var pol vision.Policy = zeroPolicy{}
		// "--want-patch N": fail every step on a grid of another patch size
		// (to see that a {patch} template reached the process).
		if len(os.Args) == 3 && os.Args[1] == "--want-patch" {
			n, _ := strconv.Atoi(os.Args[2])
			pol = patchPolicy{n}
		}
		if err := remote.Serve(os.Stdin, os.Stdout, pol, remote.ServeOptions{Name: "zero"}); err != nil {
			os.Stderr.WriteString(err.Error() + "\n")
			os.Exit(1)
		}
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// zeroPolicy always acts 0 (the first choice of a discrete game).
type zeroPolicy struct{}

func (zeroPolicy) Info() vision.Info { return vision.Info{Family: "external", Label: "zero"} }
func (zeroPolicy) Reset(uint64)      {}
func (zeroPolicy) Act(_ *vision.Observation, a []float64) error {
	clear(a)
	return nil
}

// patchPolicy is zeroPolicy on grids of one patch size, an error on others.
type patchPolicy struct{ want int }

func (patchPolicy) Info() vision.Info { return vision.Info{Family: "external", Label: "patch check"} }
func (patchPolicy) Reset(uint64)      {}
func (p patchPolicy) Act(obs *vision.Observation, a []float64) error {
	if obs.Grid.PatchW != p.want {
		return fmt.Errorf("started for patch %d, sent a grid of patch %d", p.want, obs.Grid.PatchW)
	}
	clear(a)
	return nil
}

// serveTCP serves zeroPolicy on a local port for the test's duration.
func serveTCP(t *testing.T) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Skipf("no local TCP: %v", err)
	}
	t.Cleanup(func() { ln.Close() })
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			go func() {
				defer c.Close()
				remote.Serve(c, c, zeroPolicy{}, remote.ServeOptions{Name: "zero"})
			}()
		}
	}()
	return "tcp://" + ln.Addr().String()
}

// docTable is a Markdown table of a doc: its header and rows, each cell
// trimmed of spaces and backquotes.
type docTable struct {
	header []string
	rows   [][]string
}

// docTables returns the Markdown tables in docs/NAME whose header starts
// with first.
func docTables(t *testing.T, name, first string) []docTable {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(reftest.Root(), "docs", name))
	if err != nil {
		t.Fatal(err)
	}
	cells := func(ln string) []string {
		var out []string
		for _, c := range strings.Split(strings.Trim(strings.TrimSpace(ln), "|"), "|") {
			out = append(out, strings.Trim(strings.TrimSpace(c), "`"))
		}
		return out
	}
	var out []docTable
	lines := strings.Split(string(data), "\n")
	for i, ln := range lines {
		if !strings.HasPrefix(ln, "|") || cells(ln)[0] != first || i+1 >= len(lines) || !strings.HasPrefix(lines[i+1], "|---") {
			continue
		}
		tb := docTable{header: cells(ln)}
		for _, r := range lines[i+2:] {
			if !strings.HasPrefix(r, "|") {
				break
			}
			tb.rows = append(tb.rows, cells(r))
		}
		out = append(out, tb)
	}
	if len(out) == 0 {
		t.Fatalf("docs/%s: no table starting with %q", name, first)
	}
	return out
}

// TestPolicySourcesTable runs every cell of docs/policies.md's table of
// which command takes which source: "yes" must succeed, "no" must be a
// one-line usage error.
func TestPolicySourcesTable(t *testing.T) {
	t.Setenv(serveEnv, "1") // for the exec: child only; this process has started
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	pol := filepath.Join(reftest.Root(), "testdata", "policies")
	sources := map[string]string{
		"expert": "expert", "idle": "idle", "random": "random", "fresh": "fresh", "FAMILY": "meanpool",
		"FILE.safetensors":          filepath.Join(pol, "paddle-attention-p10.safetensors"),
		"FILE-p{patch}.safetensors": filepath.Join(pol, "paddle-attention-p{patch}.safetensors"),
		"exec:COMMAND ARGS":         "exec:" + exe,
		"tcp://HOST:PORT":           serveTCP(t),
	}
	tb := docTables(t, "policies.md", "source")[1] // the second: source × command
	header, rows := tb.header, tb.rows
	if len(rows) != len(sources) {
		t.Fatalf("table has %d rows, the test knows %d sources", len(rows), len(sources))
	}
	for _, row := range rows {
		src, ok := sources[row[0]]
		if !ok {
			t.Fatalf("table row %q: no source for it in the test", row[0])
		}
		for j, cmd := range header[1:] {
			want := row[j+1]
			t.Run(cmd+"/"+row[0], func(t *testing.T) {
				if testing.Short() && (cmd == "stress" || cmd == "sizes") && row[0] != "exec:COMMAND ARGS" && row[0] != "expert" {
					t.Skip("studies of every source take a while")
				}
				args := sourceCommand(t, cmd, src)
				code, out, errs := runCLI(t, "", args...)
				switch want {
				case "yes":
					if code != 0 {
						t.Fatalf("%v: exit %d: %s%s", args, code, errs, out)
					}
				case "no":
					if code != 2 || strings.Count(errs, "\n") != 1 {
						t.Fatalf("%v: exit %d, want a one-line usage error (2): %q", args, code, errs)
					}
				default:
					t.Fatalf("cell %q: want yes or no", want)
				}
			})
		}
	}
}

// sourceCommand is a small run of cmd with --policy src on paddle.
func sourceCommand(t *testing.T, cmd, src string) []string {
	switch cmd {
	case "play":
		return []string{"play", "--game", "paddle", "--episodes", "1", "--patch", "10", "--json", "--policy", src}
	case "record":
		return []string{"record", "--game", "paddle", "--episodes", "1", "--patch", "10", "--json", "--out", filepath.Join(t.TempDir(), "r"), "--policy", src}
	case "verify":
		return []string{"verify", "--game", "paddle", "--perms", "2", "--seeds", "1", "--frames", "1", "--patch", "10", "--json", "--policy", src}
	case "stress", "sizes":
		ps := "10"
		if policies.IsTemplate(src) {
			ps = "10,20" // a template names one policy per size: a study of one size refuses it
		}
		return []string{cmd, "--game", "paddle", "--episodes", "1", "--patch", ps, "--occlude", "none,random:0.5", "--resamples", "100",
			"--json", "--out", filepath.Join(t.TempDir(), "s"), "--policy", src}
	}
	t.Fatalf("table column %q: not a command the test knows", cmd)
	return nil
}

var helpOption = regexp.MustCompile(`(?m)^  -([a-z0-9-]+)`)

// helpOptions lists the options a command's -help shows.
func helpOptions(t *testing.T, cmd string) map[string]bool {
	t.Helper()
	code, out, errs := runCLI(t, "", cmd, "-help")
	if code != 0 {
		t.Fatalf("%s -help: exit %d %s", cmd, code, errs)
	}
	set := map[string]bool{}
	for _, m := range helpOption.FindAllStringSubmatch(out, -1) {
		set[m[1]] = true
	}
	return set
}

// TestHelpMatchesDocs checks the docs' option tables against every
// command's -help: each option is shown by the commands the docs name
// and by no other command, and every command that takes --policy takes
// every option of docs/policy-protocol.md's table.
func TestHelpMatchesDocs(t *testing.T) {
	helps := map[string]map[string]bool{}
	for name := range commands {
		helps[name] = helpOptions(t, name)
	}
	for _, tb := range docTables(t, "policies.md", "option") {
		col := slices.Index(tb.header, "commands")
		if col < 0 {
			t.Fatalf("docs/policies.md: option table %v has no commands column", tb.header)
		}
		for _, r := range tb.rows {
			opt := strings.TrimPrefix(r[0], "--")
			named := map[string]bool{}
			for _, c := range strings.Split(r[col], ",") {
				named[strings.TrimSpace(c)] = true
			}
			for name, h := range helps {
				if named[name] != h[opt] {
					t.Errorf("docs/policies.md names %q for --%s; tilebench %s -help shows it: %v", r[col], opt, name, h[opt])
				}
			}
		}
	}
	proto := docTables(t, "policy-protocol.md", "option")[0]
	for name, h := range helps {
		if !h["policy"] {
			continue
		}
		for _, r := range proto.rows {
			if opt := strings.TrimPrefix(r[0], "--"); !h[opt] {
				t.Errorf("docs/policy-protocol.md promises --%s on every command that takes --policy; %s lacks it", opt, name)
			}
		}
	}
}

// TestPlayGIFShowsTheTransform: the frames play keeps are the ones the
// policy saw, after --occlude.
func TestPlayFramesShowTheTransform(t *testing.T) {
	blackFrame0 := func(extra ...string) int {
		dir := filepath.Join(t.TempDir(), "f")
		args := append([]string{"play", "--game", "paddle", "--episodes", "1", "--patch", "10", "--frames", dir, "--gif", filepath.Join(dir + ".gif")}, extra...)
		if code, _, errs := runCLI(t, "", args...); code != 0 {
			t.Fatalf("%v: exit %d %s", args, code, errs)
		}
		f, err := os.Open(filepath.Join(dir, "episode-001", "frame-00000.png"))
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		img, err := png.Decode(f)
		if err != nil {
			t.Fatal(err)
		}
		n := 0
		for y := 0; y < 80; y += 10 {
			for x := 0; x < 120; x += 10 {
				black := true
				for dy := range 10 {
					for dx := range 10 {
						if r, g, b, _ := img.At(x+dx, y+dy).RGBA(); r|g|b != 0 {
							black = false
						}
					}
				}
				if black {
					n++
				}
			}
		}
		return n
	}
	clean, occluded := blackFrame0(), blackFrame0("--occlude", "random:0.5")
	// 96 cells, 0.5·96 = 48 of them hidden.
	if occluded < 48 || clean >= 48 {
		t.Fatalf("black cells: %d clean, %d under random:0.5 (want < 48 and ≥ 48)", clean, occluded)
	}
}

// TestStressRecordsPolicyOptions: a study takes --policy-obs and
// --policy-dtype and keeps them in study.json, so that a resume or a
// replay sends the policy the same observations.
func TestStressRecordsPolicyOptions(t *testing.T) {
	t.Setenv(serveEnv, "1")
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "s")
	code, _, errs := runCLI(t, "", "stress", "--game", "paddle", "--episodes", "1", "--patch", "10", "--resamples", "100",
		"--policy", "exec:"+exe, "--policy-obs", "tokens", "--policy-dtype", "float32", "--policy-timeout", "20s", "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	si, err := study.ReadInfo(out)
	if err != nil {
		t.Fatal(err)
	}
	if p := si.Definition.Policy; p.Obs != "tokens" || p.Dtype != "float32" || p.Timeout != "20s" {
		t.Fatalf("recorded policy %+v", p)
	}
	if code, out, errs := runCLI(t, "", "replay", out, "--cell", "0", "--episode", "0"); code != 0 {
		t.Fatalf("replay: exit %d %s %s", code, out, errs)
	}
}

// TestVerifyBaseTransform: verify measures on transformed frames, and
// refuses a base transform that changes the token count.
func TestVerifyBaseTransform(t *testing.T) {
	code, m, errs := verifyJSON(t, "--policy", "mlp", "--game", "paddle", "--perms", "3", "--seeds", "1", "--frames", "1",
		"--occlude", "random:1", "--brightness", "0.2")
	if code != 0 || m["transform"] != "occlude=random:1 brightness=0.2" {
		t.Fatalf("exit %d, transform %v: %s", code, m["transform"], errs)
	}
	code, _, errs = runCLI(t, "", "verify", "--policy", "mlp", "--game", "paddle", "--occlude", "random:0.5", "--fill", "drop")
	if code != 2 || strings.Count(errs, "\n") != 1 || !strings.Contains(errs, "--fill drop") {
		t.Fatalf("fill drop: exit %d %q", code, errs)
	}
}
