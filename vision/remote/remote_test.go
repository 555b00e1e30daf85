package remote

import (
	"bufio"
	"encoding/json"
	"errors"
	"image"
	"io"
	"math"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
)

func open(t testing.TB, mode string, mod func(*Config)) (*Policy, error) {
	t.Helper()
	g := &blobs{}
	cfg := Config{Game: g.Spec(), Grid: testGrid(t), Env: []string{helperEnv + "=" + mode}, StepTimeout: 3 * time.Second, HandshakeTimeout: 10 * time.Second}
	if mod != nil {
		mod(&cfg)
	}
	return Open(helperTarget(t), cfg)
}

// episode runs one episode of blobs with pol and the pipeline spec.
func episode(t *testing.T, pol vision.Policy, spec patch.Spec, gameSeed uint64) (vision.Result, error) {
	t.Helper()
	g := &blobs{}
	grid := testGrid(t)
	pipe, err := patch.NewPipeline(grid, spec)
	if err != nil {
		t.Fatal(err)
	}
	ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, pol)
	if err != nil {
		t.Fatal(err)
	}
	return ep.Run(gameSeed, gameSeed+100, nil)
}

func alive(pid int) bool { return syscall.Kill(pid, 0) == nil }

func TestFaults(t *testing.T) {
	cases := []struct {
		mode string
		kind Kind
		want string
	}{
		{"crash:2", Crash, "exit status 3"},
		{"exit0:1", Crash, "closed its output"},
		{"hang:2", Timeout, "no reply within 400ms"},
		{"garbage:2", Garbage, "not a JSON object"},
		{"shape:2", Shape, "3 values, want 2"},
		{"nan:2", NonFinite, "value 0 is NaN"},
		{"inf:2", NonFinite, "value 1 is -Inf"},
		{"bounds:2", Bounds, "(x) = 5 outside [-1, 1]"},
		{"oversize:2", TooLarge, "longer than 65536"},
		{"payload:2", TooLarge, "payload of 1000000 bytes"},
		{"badt:2", Protocol, `"t":2`},
		{"error:2", Reported, "CUDA out of memory"},
		{"wrongmsg:2", Protocol, "want an action"},
	}
	for _, c := range cases {
		t.Run(c.mode, func(t *testing.T) {
			p, err := open(t, c.mode, func(cfg *Config) { cfg.StepTimeout = 400 * time.Millisecond })
			if err != nil {
				t.Fatal(err)
			}
			pid := p.cmd.Process.Pid
			res, err := episode(t, p, patch.Spec{}, 1)
			var fe *FaultError
			if !errors.As(err, &fe) || !errors.Is(err, ErrPolicyFault) {
				t.Fatalf("error %v (%T): want a FaultError", err, err)
			}
			if fe.Kind != c.kind || fe.Step != 2 && c.kind != Crash || res.Steps != fe.Step {
				t.Fatalf("fault %+v after %d steps: want kind %s at step 2", fe, res.Steps, c.kind)
			}
			msg := err.Error()
			if strings.Contains(msg, "\n") || !strings.Contains(msg, c.want) || !strings.Contains(msg, "exec:") || !strings.Contains(msg, "step "+strconv.Itoa(fe.Step)) {
				t.Fatalf("message %q: want one line naming the policy, the step and %q", msg, c.want)
			}
			if alive(pid) {
				t.Fatalf("child %d still alive after the fault", pid)
			}
			// The session stays failed with the same error.
			var a [2]float64
			if err2 := p.Act(&vision.Observation{}, a[:]); err2 != error(fe) {
				t.Fatalf("Act after fault: %v", err2)
			}
			if err2 := p.Close(); err2 != error(fe) {
				t.Fatalf("Close after fault: %v", err2)
			}
		})
	}
}

func TestCrashKeepsStderr(t *testing.T) {
	dir := t.TempDir()
	p, err := open(t, "crash:3", func(c *Config) { c.LogDir = dir; c.LogName = "cell-7.stderr" })
	if err != nil {
		t.Fatal(err)
	}
	_, err = episode(t, p, patch.Spec{}, 1)
	var fe *FaultError
	if !errors.As(err, &fe) || fe.Kind != Crash || fe.Step != 3 {
		t.Fatalf("error %v", err)
	}
	if fe.Stderr != "RuntimeError: boom at step 3" || !strings.Contains(err.Error(), "boom at step 3") {
		t.Fatalf("stderr tail %q in %q", fe.Stderr, err)
	}
	log := filepath.Join(dir, "cell-7.stderr")
	b, rerr := os.ReadFile(log)
	if rerr != nil || !strings.Contains(string(b), "Traceback") || !strings.Contains(string(b), "boom at step 3") || fe.Log != log {
		t.Fatalf("log %s: %q, %v (fault log %q)", log, b, rerr, fe.Log)
	}
}

func TestSlowReplyUnderTimeout(t *testing.T) {
	p, err := open(t, "slow:1", func(c *Config) { c.StepTimeout = 3 * time.Second })
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	res, err := episode(t, p, patch.Spec{}, 1)
	if err != nil || res.Steps != 20 {
		t.Fatalf("slow reply: %v after %d steps", err, res.Steps)
	}
}

func TestGrandchildKilledWithGroup(t *testing.T) {
	p, err := open(t, "grandchild:1", func(c *Config) { c.StepTimeout = 500 * time.Millisecond })
	if err != nil {
		t.Fatal(err)
	}
	_, err = episode(t, p, patch.Spec{}, 1)
	var fe *FaultError
	if !errors.As(err, &fe) || fe.Kind != Timeout {
		t.Fatalf("error %v", err)
	}
	m := regexp.MustCompile(`grandchild (\d+)`).FindStringSubmatch(fe.Stderr)
	if m == nil {
		t.Fatalf("no grandchild pid in %q", fe.Stderr)
	}
	pid, _ := strconv.Atoi(m[1])
	deadline := time.Now().Add(2 * time.Second)
	for alive(pid) && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	// A killed grandchild is reaped by init; until then kill(pid, 0)
	// still succeeds on a zombie, so look at its state.
	if b, err := os.ReadFile("/proc/" + m[1] + "/stat"); err == nil && !strings.Contains(string(b), ") Z") {
		t.Fatalf("grandchild %d survived: %s", pid, b)
	}
}

func TestHandshakeFaults(t *testing.T) {
	_, err := open(t, "refuse", nil)
	var fe *FaultError
	if !errors.As(err, &fe) || fe.Kind != Refused || !strings.Contains(err.Error(), "I only play drive, not blobs") || !strings.Contains(err.Error(), "handshake") {
		t.Fatalf("refusal: %v", err)
	}
	_, err = open(t, "badready", nil)
	if !errors.As(err, &fe) || fe.Kind != Protocol || !strings.Contains(err.Error(), "protocol 1") {
		t.Fatalf("bad ready: %v", err)
	}
	start := time.Now()
	_, err = open(t, "silent", func(c *Config) { c.HandshakeTimeout = 300 * time.Millisecond })
	if !errors.As(err, &fe) || fe.Kind != Timeout || time.Since(start) > 5*time.Second {
		t.Fatalf("silent policy: %v after %v", err, time.Since(start))
	}
	// A missing program is the caller's error, not a policy fault.
	_, err = Open("exec:/nonexistent/policy --x", Config{Game: (&blobs{}).Spec(), Grid: testGrid(t)})
	if err == nil || errors.Is(err, ErrPolicyFault) || !strings.Contains(err.Error(), "/nonexistent/policy") {
		t.Fatalf("missing program: %v", err)
	}
}

func TestEnvironment(t *testing.T) {
	p, err := open(t, "env", func(c *Config) { c.Env = append(c.Env, "X_EXTRA=yes"); c.Obs = ObsTokens })
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	if p.Name() != "blobs,tokens,1,yes" {
		t.Fatalf("child saw environment %q", p.Name())
	}
	if p.Info().Family != "external" || p.Info().WantsFrame || !strings.Contains(p.Info().Label, "blobs,tokens") {
		t.Fatalf("info %+v", p.Info())
	}
}

// No shell runs: variables, globs and separators reach the program as
// they were written.
func TestNoShell(t *testing.T) {
	g := &blobs{}
	p, err := Open(helperTarget(t)+` $HOME '*' ";" "a b" $(id)`, Config{Game: g.Spec(), Grid: testGrid(t), Env: []string{helperEnv + "=argv"}})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	if want := "-test.run=^$|$HOME|*|;|a b|$(id)"; p.Name() != want {
		t.Fatalf("child got %q, want %q", p.Name(), want)
	}
}

func TestClampWhenAsked(t *testing.T) {
	p, err := open(t, "bounds:0", func(c *Config) { c.Clamp = true })
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	res, err := episode(t, p, patch.Spec{}, 1)
	// Step 0 answers x = 5, clamped to 1; the others answer 0.
	if err != nil || res.Return != 1 {
		t.Fatalf("clamped episode: return %v, %v", res.Return, err)
	}
}

func TestDiscreteChoiceChecked(t *testing.T) {
	g := &blobs{discrete: true}
	cfg := Config{Game: g.Spec(), Grid: testGrid(t), Env: []string{helperEnv + "=choice:1"}}
	p, err := Open(helperTarget(t), cfg)
	if err != nil {
		t.Fatal(err)
	}
	grid := testGrid(t)
	pipe, _ := patch.NewPipeline(grid, patch.Spec{})
	ep, _ := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, p)
	_, err = ep.Run(1, 1, nil)
	var fe *FaultError
	if !errors.As(err, &fe) || fe.Kind != Shape || !strings.Contains(err.Error(), "choice 1.5 is not one of 0..2") {
		t.Fatalf("discrete: %v", err)
	}
}

// A protocol policy that answers as the built-in one does gives the same
// episodes, bit for bit, over pipes and over TCP, for frames and tokens.
func TestSameResultsAsBuiltIn(t *testing.T) {
	spec := patch.Spec{Scramble: "full", NoiseTokens: 3}
	results := func(pol vision.Policy) []vision.Result {
		var want []vision.Result
		for s := uint64(1); s <= 3; s++ {
			r, err := episode(t, pol, spec, s)
			if err != nil {
				t.Fatal(err)
			}
			want = append(want, r)
		}
		return want
	}
	wantSum, wantFrame := results(&sumPolicy{}), results(&framePolicy{})
	if wantSum[0].Return == wantSum[1].Return {
		t.Fatal("test policy ignores its input")
	}
	check := func(name string, p *Policy, want []vision.Result) {
		t.Helper()
		for i, w := range want {
			r, err := episode(t, p, spec, uint64(i+1))
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			if math.Float64bits(r.Return) != math.Float64bits(w.Return) || r.Steps != w.Steps || r.Reason != w.Reason {
				t.Fatalf("%s seed %d: return %v in %d steps, built-in %v in %d", name, i+1, r.Return, r.Steps, w.Return, w.Steps)
			}
			if err := p.End(r.Return, r.Steps); err != nil {
				t.Fatal(err)
			}
		}
		if err := p.Close(); err != nil {
			t.Fatalf("%s close: %v", name, err)
		}
	}
	p, err := open(t, "sum", func(c *Config) { c.Obs, c.Dtype = ObsTokens, Float32 })
	if err != nil {
		t.Fatal(err)
	}
	if !p.Info().Invariant {
		t.Fatal("ready's invariant flag lost")
	}
	check("exec tokens", p, wantSum)
	for _, dt := range []string{Uint8, Float32} {
		p, err := open(t, "frame", func(c *Config) { c.Obs, c.Dtype = ObsFrame, dt })
		if err != nil {
			t.Fatal(err)
		}
		check("exec frame "+dt, p, wantFrame)
	}

	// TCP: serve in this process.
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	done := make(chan error, 1)
	go func() {
		c, err := ln.Accept()
		if err != nil {
			done <- err
			return
		}
		defer c.Close()
		done <- Serve(c, c, &sumPolicy{}, ServeOptions{})
	}()
	p, err = Open("tcp://"+ln.Addr().String(), Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), Obs: ObsTokens, Dtype: Float32})
	if err != nil {
		t.Fatal(err)
	}
	check("tcp tokens", p, wantSum)
	if err := <-done; err != nil {
		t.Fatalf("server: %v", err)
	}
}

// The built-in families, run in this process and served by a child over
// the protocol (float32 tokens), give the same episodes bit for bit.
func TestSameResultsAsBuiltInFamilies(t *testing.T) {
	g := &blobs{}
	for _, fam := range nets.Families {
		spec := patch.Spec{Scramble: "full", NoiseTokens: 2}
		if fam == nets.MLP {
			spec = patch.Spec{} // a fixed-size family: no added tokens
		}
		n, err := nets.New(nets.Config{Family: fam}, testGrid(t), g.Spec().Action, netSeed)
		if err != nil {
			t.Fatal(err)
		}
		p, err := open(t, "net:"+fam, func(c *Config) { c.Obs, c.Dtype = ObsTokens, Float32 })
		if err != nil {
			t.Fatal(err)
		}
		for s := uint64(1); s <= 2; s++ {
			want, err := episode(t, n, spec, s)
			if err != nil {
				t.Fatal(err)
			}
			got, err := episode(t, p, spec, s)
			if err != nil {
				t.Fatalf("%s: %v", fam, err)
			}
			if math.Float64bits(got.Return) != math.Float64bits(want.Return) || got.Steps != want.Steps {
				t.Fatalf("%s seed %d: external %v in %d steps, built-in %v in %d", fam, s, got.Return, got.Steps, want.Return, want.Steps)
			}
		}
		if err := p.Close(); err != nil {
			t.Fatal(err)
		}
	}
}

func TestTCPFaults(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	go func() {
		c, err := ln.Accept()
		if err != nil {
			return
		}
		// Accept, then go away at the first step.
		buf := make([]byte, 4096)
		c.Read(buf)
		c.Write([]byte(`{"msg":"ready","protocol":1}` + "\n"))
		c.Read(buf)
		c.Close()
	}()
	target := "tcp://" + ln.Addr().String()
	p, err := Open(target, Config{Game: (&blobs{}).Spec(), Grid: testGrid(t)})
	if err != nil {
		t.Fatal(err)
	}
	_, err = episode(t, p, patch.Spec{}, 1)
	var fe *FaultError
	if !errors.As(err, &fe) || (fe.Kind != Crash && fe.Kind != IO) || !strings.Contains(err.Error(), target) {
		t.Fatalf("closed connection: %v", err)
	}
	ln.Close()
	if _, err := Open(target, Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), HandshakeTimeout: time.Second}); err == nil || errors.Is(err, ErrPolicyFault) {
		t.Fatalf("connect to a closed port: %v", err)
	}
}

func TestTargets(t *testing.T) {
	argv, err := ParseExec(`exec:python3 "my policy.py" --flag 'a b' c\ d`)
	if err != nil || strings.Join(argv, "|") != "python3|my policy.py|--flag|a b|c d" {
		t.Fatalf("ParseExec: %q, %v", argv, err)
	}
	for _, bad := range []string{"exec:", "exec:   ", `exec:python3 "unterminated`} {
		if _, err := ParseExec(bad); err == nil {
			t.Errorf("ParseExec(%q) accepted", bad)
		}
	}
	if a, err := ParseTCP("tcp://127.0.0.1:7000"); err != nil || a != "127.0.0.1:7000" {
		t.Fatalf("ParseTCP: %q %v", a, err)
	}
	for _, bad := range []string{"tcp://", "tcp://host", "tcp://:7000", "tcp://h:0", "tcp://h:99999", "tcp://h:70/x", "tcp://u@h:70", "udp://h:1"} {
		if _, err := ParseTCP(bad); err == nil {
			t.Errorf("ParseTCP(%q) accepted", bad)
		}
	}
	if !IsTarget("exec:x") || !IsTarget("tcp://h:1") || IsTarget("attention") || IsTarget("w.safetensors") {
		t.Fatal("IsTarget")
	}
	if _, err := Open("ftp://x", Config{Game: (&blobs{}).Spec(), Grid: testGrid(t)}); err == nil {
		t.Fatal("ftp target accepted")
	}
	if _, err := Open("exec:x", Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), Obs: "pixels"}); err == nil || !strings.Contains(err.Error(), "pixels") {
		t.Fatalf("bad obs kind: %v", err)
	}
}

func TestHeaderParse(t *testing.T) {
	good := []string{
		`{}`, ` { } `, `{"msg":"action","t":3,"action":[0.5,-1e-3,2E+2]}`,
		`{"a":true,"b":false,"c":null,"d":[],"e":"x\"y\\u00e9"}`,
		`{"action":[NaN,Infinity,-Infinity]}`, `{"t":-0}`,
	}
	var h header
	for _, s := range good {
		if err := h.parse([]byte(s)); err != nil {
			t.Errorf("parse(%s): %v", s, err)
		}
	}
	h.parse([]byte(`{"msg":"action","t":3,"action":[0.5,-1e-3,2E+2],"reason":"a\nb"}`))
	if v, _, _ := h.floats("action"); len(v) != 3 || v[0] != 0.5 || v[1] != -1e-3 || v[2] != 200 {
		t.Errorf("action %v", v)
	}
	if !h.isMsg("action") || h.isMsg("act") {
		t.Error("isMsg")
	}
	if s, _ := h.str("reason"); s != "a\nb" {
		t.Errorf("reason %q", s)
	}
	if v, ok, err := h.integer("t", 0, 10); v != 3 || !ok || err != nil {
		t.Errorf("t = %v %v %v", v, ok, err)
	}
	if _, _, err := h.integer("t", 5, 10); err == nil {
		t.Error("integer range")
	}
	bad := []string{
		``, `[]`, `{`, `{"a"}`, `{"a":}`, `{"a":1,}`, `{"a":1 "b":2}`, `{"a":1}x`, `{"a":1}{}`,
		`{"a":{"b":1}}`, `{"a":["x"]}`, `{"a":[1,]}`, `{"a":01}`, `{"a":1.}`, `{"a":.5}`, `{"a":1e}`,
		`{"a":-}`, `{"a":"\x"}`, "{\"a\":\"\x01\"}", `{"a":"unterminated}`, `{"a":1,"a":2}`,
		`{"a\u0062":1}`, `{"a":tru}`, `{"a":nan}`, `{"a":[1 2]}`, `{a:1}`,
	}
	for _, s := range bad {
		if err := h.parse([]byte(s)); err == nil || !errors.Is(err, errHeader) {
			t.Errorf("parse(%q) = %v: want a header error", s, err)
		}
	}
}

func TestHeaderParseAllocatesNothing(t *testing.T) {
	var h header
	line := []byte(`{"msg":"action","t":12345,"action":[0.25,-0.5,1e-7]}`)
	h.parse(line)
	n := testing.AllocsPerRun(100, func() {
		if err := h.parse(line); err != nil || !h.isMsg("action") {
			t.Fatal(err)
		}
		h.integer("t", 0, 1<<40)
		h.floats("action")
	})
	if n != 0 {
		t.Fatalf("%v allocations per header", n)
	}
}

// FuzzHeader checks the header parser against encoding/json: whatever it
// accepts (apart from the NaN/Infinity literals) encoding/json accepts
// too, with the same numbers.
func FuzzHeader(f *testing.F) {
	for _, s := range []string{
		`{"msg":"action","t":3,"action":[0.5,-1e-3,2E+2]}`, `{"msg":"ready","protocol":1,"name":"x\u00e9"}`,
		`{"msg":"error","reason":"a\"b"}`, `{"action":[NaN]}`, `{"a":true,"b":null,"c":[]}`, `{}`,
		`{"msg":"step","t":0,"n":12,"prev":[0,0],"len":27648}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		var h header
		if err := h.parse(line); err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		for _, v := range h.nums {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return // non-standard literals (or a number out of range)
			}
		}
		var m map[string]any
		if err := json.Unmarshal(line, &m); err != nil {
			t.Fatalf("parser accepted %q, encoding/json refuses: %v", line, err)
		}
		if len(m) != len(h.fields) {
			t.Fatalf("%d keys, encoding/json sees %d", len(h.fields), len(m))
		}
		for _, fl := range h.fields {
			v := m[string(fl.key)]
			switch fl.kind {
			case kindNumber:
				if x, ok := v.(float64); !ok || x != fl.num {
					t.Fatalf("key %s: %v vs %v", fl.key, fl.num, v)
				}
			case kindArray:
				arr, ok := v.([]any)
				if !ok || len(arr) != fl.hi-fl.lo {
					t.Fatalf("key %s: array %v", fl.key, v)
				}
				for i, a := range arr {
					if a.(float64) != h.nums[fl.lo+i] {
						t.Fatalf("key %s[%d]: %v vs %v", fl.key, i, h.nums[fl.lo+i], a)
					}
				}
			case kindString:
				s, _ := h.str(string(fl.key))
				if v != s {
					t.Fatalf("key %s: %q vs %q", fl.key, s, v)
				}
			}
		}
	})
}

// benchSession opens an echo child for 96×96×3 frames.
func benchSession(b *testing.B, obs, dtype string) (*Policy, *vision.Observation) {
	return benchSessionMode(b, obs, dtype, "echo")
}

// benchSessionMode is benchSession with the helper mode given.
func benchSessionMode(b *testing.B, obs, dtype, mode string) (*Policy, *vision.Observation) {
	grid, err := patch.NewGrid(patch.GridConfig{Width: 96, Height: 96, PatchW: 8})
	if err != nil {
		b.Fatal(err)
	}
	spec := games.Spec{Name: "bench", Width: 96, Height: 96, Action: games.Controls{Kind: games.Continuous, Names: []string{"a", "b", "c"}, Low: []float64{-1, -1, -1}, High: []float64{1, 1, 1}}}
	p, err := Open(helperTarget(b), Config{Game: spec, Grid: grid, Obs: obs, Dtype: dtype, Env: []string{helperEnv + "=" + mode}})
	if err != nil {
		b.Fatal(err)
	}
	frame := image.NewRGBA(image.Rect(0, 0, 96, 96))
	for i := range frame.Pix {
		frame.Pix[i] = uint8(i * 31)
	}
	ts := patch.NewTokenSet(grid.N(), grid.D())
	if err := patch.NewTokenizer(grid).Tokenize(frame, ts); err != nil {
		b.Fatal(err)
	}
	return p, &vision.Observation{Tokens: ts, Grid: grid, Frame: frame, PrevAction: make([]float64, 3)}
}

// BenchmarkExternalStep is one step's round trip (a 96×96×3 uint8 frame
// out, an action back) against a trivial Go echo child over pipes.
func BenchmarkExternalStep(b *testing.B) {
	p, obs := benchSession(b, ObsFrame, Uint8)
	defer p.Close()
	act := make([]float64, 3)
	p.Reset(1)
	// Each round trip is timed too, and the median reported beside the
	// mean: on a shared machine the median is the robust figure.
	samples := make([]time.Duration, 1<<16)
	n := 0
	b.ReportAllocs()
	b.SetBytes(96 * 96 * 3)
	for b.Loop() {
		start := time.Now()
		if err := p.Act(obs, act); err != nil {
			b.Fatal(err)
		}
		samples[n%len(samples)] = time.Since(start)
		n++
		obs.Step++
	}
	samples = samples[:min(n, len(samples))]
	slices.Sort(samples)
	b.ReportMetric(float64(samples[len(samples)/2].Nanoseconds()), "median-ns/step")
}

// BenchmarkExternalBatch is one batch message of 64 96×96×3 uint8
// frames and its reply, against Serve with a zero policy; ns/frame is
// the cost per frame on both sides.
func BenchmarkExternalBatch(b *testing.B) {
	p, obs := benchSessionMode(b, ObsFrame, Uint8, "echobatch")
	defer p.Close()
	if p.BatchSize() != 64 {
		b.Fatalf("batch size %d", p.BatchSize())
	}
	obsB, acts := make([]*vision.Observation, 64), make([][]float64, 64)
	for i := range obsB {
		o := *obs
		o.Step = i
		obsB[i], acts[i] = &o, make([]float64, 3)
	}
	p.Reset(1)
	b.ReportAllocs()
	b.SetBytes(64 * 96 * 96 * 3)
	for b.Loop() {
		if err := p.ActBatch(obsB, acts); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/64, "ns/frame")
}

// BenchmarkExternalBatchPacked is BenchmarkExternalBatch with the frames
// given as packed bytes written in FrameBuffer's room (no RGBA frames,
// no copy of the payload on this side).
func BenchmarkExternalBatchPacked(b *testing.B) {
	p, obs := benchSessionMode(b, ObsFrame, Uint8, "echobatch")
	defer p.Close()
	obsB, acts := make([]*vision.Observation, 64), make([][]float64, 64)
	for i := range obsB {
		o := *obs
		o.Step, o.Frame = i, nil
		obsB[i], acts[i] = &o, make([]float64, 3)
	}
	buf := p.FrameBuffer(64)
	for i := 0; i < 64; i++ {
		appendFrame(buf[i*96*96*3:i*96*96*3], obs.Frame, 3, Uint8)
	}
	p.Reset(1)
	b.ReportAllocs()
	b.SetBytes(64 * 96 * 96 * 3)
	for b.Loop() {
		if err := p.ActBatchPacked(obsB, buf, acts); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/64, "ns/frame")
}

// BenchmarkExternalBatchFile is BenchmarkExternalBatch with the frames
// stored in a file (ActBatchFile): over exec: on Linux they are spliced
// from the file into the child's pipe.
func BenchmarkExternalBatchFile(b *testing.B) {
	p, obs := benchSessionMode(b, ObsFrame, Uint8, "echobatch")
	defer p.Close()
	obsB, acts := make([]*vision.Observation, 64), make([][]float64, 64)
	data := make([]byte, 0, 64*96*96*3)
	for i := range obsB {
		o := *obs
		o.Step, o.Frame = i, nil
		obsB[i], acts[i] = &o, make([]float64, 3)
		data = appendFrame(data, obs.Frame, 3, Uint8)
	}
	path := filepath.Join(b.TempDir(), "frames.bin")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		b.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	p.Reset(1)
	b.ReportAllocs()
	b.SetBytes(64 * 96 * 96 * 3)
	for b.Loop() {
		if err := p.ActBatchFile(obsB, f, 0, acts); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/64, "ns/frame")
}

// BenchmarkExternalStepTokens sends the 144 float32 tokens instead.
func BenchmarkExternalStepTokens(b *testing.B) {
	p, obs := benchSession(b, ObsTokens, Float32)
	defer p.Close()
	act := make([]float64, 3)
	p.Reset(1)
	b.ReportAllocs()
	for b.Loop() {
		if err := p.Act(obs, act); err != nil {
			b.Fatal(err)
		}
		obs.Step++
	}
}

// BenchmarkPipeFloor is the same exchange (a header line and 27648 bytes
// out, a fixed reply line back) with no protocol code on either side: the
// cost of the pipes and of waking two processes, for comparison with
// BenchmarkExternalStep in the same run.
func BenchmarkPipeFloor(b *testing.B) {
	exe, _ := os.Executable()
	cmd := exec.Command(exe, "-test.run=^$")
	cmd.Env = append(os.Environ(), helperEnv+"=rawecho")
	w, err := cmd.StdinPipe()
	if err != nil {
		b.Fatal(err)
	}
	r, err := cmd.StdoutPipe()
	if err != nil {
		b.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	defer func() { w.Close(); cmd.Wait() }()
	msg := append([]byte(`{"msg":"step","t":0,"prev":[0,0,0],"len":27648}`+"\n"), make([]byte, 27648)...)
	br := bufio.NewReaderSize(r, MaxLine)
	b.ReportAllocs()
	b.SetBytes(27648)
	for b.Loop() {
		if _, err := w.Write(msg); err != nil {
			b.Fatal(err)
		}
		if _, err := br.ReadSlice('\n'); err != nil {
			b.Fatal(err)
		}
	}
}

func TestFrameRoundTrip(t *testing.T) {
	img := image.NewRGBA(image.Rect(0, 0, 7, 5))
	for i := range img.Pix {
		img.Pix[i] = uint8(i*37 + 11)
		if i%4 == 3 {
			img.Pix[i] = 255
		}
	}
	for _, c := range []struct {
		ch   int
		dt   string
		size int
	}{{3, Uint8, 1}, {3, Float32, 4}, {1, Uint8, 1}, {1, Float32, 4}} {
		b := appendFrame([]byte("head"), img, c.ch, c.dt)
		if string(b[:4]) != "head" || len(b) != 4+7*5*c.ch*c.size {
			t.Fatalf("%d/%s: %d bytes", c.ch, c.dt, len(b))
		}
		got := make([]byte, len(img.Pix))
		decodeFrame(got, b[4:], 35, c.ch, c.size)
		for i := 0; i < 35; i++ {
			for k := 0; k < 4; k++ {
				want := img.Pix[4*i+k]
				if c.ch == 1 && k < 3 {
					want = img.Pix[4*i]
				}
				if got[4*i+k] != want {
					t.Fatalf("%d/%s pixel %d channel %d: %d, want %d", c.ch, c.dt, i, k, got[4*i+k], want)
				}
			}
		}
	}
}

// BenchmarkFrameCodec is the CPU part of a frame step on both sides:
// packing a 96×96 RGBA frame into RGB bytes and unpacking it again.
func BenchmarkFrameCodec(b *testing.B) {
	img := image.NewRGBA(image.Rect(0, 0, 96, 96))
	buf := make([]byte, 0, 96*96*3)
	pix := make([]byte, len(img.Pix))
	b.ReportAllocs()
	for b.Loop() {
		buf = appendFrame(buf[:0], img, 3, Uint8)
		decodeFrame(pix, buf, 96*96, 3, 1)
	}
}

// FuzzServe feeds Serve a valid hello followed by arbitrary messages: it
// must answer or return an error, never panic.
func FuzzServe(f *testing.F) {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 16, Height: 8, PatchW: 8})
	for _, obs := range []string{ObsFrame, ObsTokens} {
		h := Hello{Msg: "hello", Protocol: Version, Game: "g", Obs: obs, Dtype: Uint8, Frame: [3]int{8, 16, 3},
			Tokens: layoutOf(grid, 4), Action: specOf(games.Controls{Kind: games.Discrete, Names: []string{"a", "b"}}),
			Limits: Limits{MaxLine: MaxLine, MaxPayload: 1024}}
		b, _ := json.Marshal(h)
		hello := append(b, '\n')
		f.Add(hello, []byte(`{"msg":"start","episode":0,"seed":5}`+"\n"+`{"msg":"step","t":0,"n":2,"prev":[0],"len":392}`+"\n"+strings.Repeat("x", 392)+`{"msg":"bye"}`+"\n"))
		f.Add(hello, []byte(`{"msg":"step","t":0,"prev":[1],"len":384}`+"\n"+strings.Repeat("y", 384)))
	}
	f.Fuzz(func(t *testing.T, hello, rest []byte) {
		var h Hello
		if json.Unmarshal(hello, &h) != nil || h.Limits.MaxPayload > 1<<16 || h.Tokens.Max > 1024 || h.Frame[0]*h.Frame[1] > 1<<16 || h.Frame[0] < 0 || h.Frame[1] < 0 {
			return // keep the fuzzer's allocations small
		}
		in := append(append([]byte(nil), hello...), rest...)
		Serve(strings.NewReader(string(in)), io.Discard, zeroPolicy{}, ServeOptions{})
	})
}

func TestServeRefusesInconsistentHello(t *testing.T) {
	grid := testGrid(t)
	h := Hello{Msg: "hello", Protocol: Version, Game: "g", Obs: ObsFrame, Dtype: Uint8, Frame: [3]int{24, 32, 0},
		Tokens: layoutOf(grid, 12), Action: specOf((&blobs{}).Spec().Action), Limits: Limits{MaxPayload: 4096}}
	b, _ := json.Marshal(h)
	var out strings.Builder
	err := Serve(strings.NewReader(string(b)+"\n"), &out, zeroPolicy{}, ServeOptions{})
	if err == nil || !strings.Contains(out.String(), `"refuse"`) || !strings.Contains(out.String(), "does not match") {
		t.Fatalf("Serve: %v, wrote %q", err, out.String())
	}
}

// The messages of a session, in order, as a policy sees them.
func TestMessageSequence(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	seen := make(chan []string, 1)
	go func() {
		c, err := ln.Accept()
		if err != nil {
			seen <- nil
			return
		}
		defer c.Close()
		br := bufio.NewReader(c)
		var log []string
		for {
			line, err := br.ReadBytes('\n')
			if err != nil {
				break
			}
			var m map[string]any
			json.Unmarshal(line, &m)
			entry := m["msg"].(string)
			if n, ok := m["len"].(float64); ok {
				br.Discard(int(n))
			}
			switch entry {
			case "hello":
				c.Write([]byte(`{"msg":"ready","protocol":1}` + "\n"))
			case "step":
				entry += strconv.Itoa(int(m["t"].(float64)))
				c.Write([]byte(`{"msg":"action","t":` + strconv.Itoa(int(m["t"].(float64))) + `,"action":[0.5,0]}` + "\n"))
			case "start":
				entry += strconv.Itoa(int(m["episode"].(float64))) + "/" + strconv.FormatUint(uint64(m["seed"].(float64)), 10)
			case "end":
				entry += strconv.Itoa(int(m["episode"].(float64)))
				if r, ok := m["return"]; ok {
					entry += "=" + strconv.FormatFloat(r.(float64), 'g', -1, 64)
				}
			}
			log = append(log, entry)
			if entry == "bye" {
				break
			}
		}
		seen <- log
	}()
	p, err := Open("tcp://"+ln.Addr().String(), Config{Game: (&blobs{}).Spec(), Grid: testGrid(t)})
	if err != nil {
		t.Fatal(err)
	}
	frame := image.NewRGBA(image.Rect(0, 0, 32, 24))
	obs := &vision.Observation{Frame: frame, Grid: testGrid(t), PrevAction: []float64{0, 0}}
	act := make([]float64, 2)
	step := func(tt int) {
		obs.Step = tt
		if err := p.Act(obs, act); err != nil || act[0] != 0.5 {
			t.Fatalf("step %d: %v %v", tt, act, err)
		}
	}
	p.Reset(11)
	step(0)
	step(1)
	p.Reset(12) // no End for episode 0
	step(0)
	if err := p.End(5, 1); err != nil {
		t.Fatal(err)
	}
	p.Reset(13) // never stepped
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
	got := strings.Join(<-seen, " ")
	want := "hello start0/11 step0 step1 end0 start1/12 step0 end1=5 bye"
	if got != want {
		t.Fatalf("messages\n got %s\nwant %s", got, want)
	}
}
