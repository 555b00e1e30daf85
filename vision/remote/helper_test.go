package remote

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"io"
	"math"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
)

// The test binary re-executes itself as the fake policy: with
// TILEBENCH_REMOTE_HELPER set, TestMain runs the helper instead of the
// tests.
const helperEnv = "TILEBENCH_REMOTE_HELPER"

func TestMain(m *testing.M) {
	if mode := os.Getenv(helperEnv); mode != "" {
		os.Exit(runHelper(mode))
	}
	os.Exit(m.Run())
}

// helperTarget is the exec: target that runs the helper in mode.
func helperTarget(t testing.TB) string {
	t.Helper()
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	if strings.ContainsAny(exe, " '\"\\") {
		t.Skipf("test binary path %q needs quoting", exe)
	}
	return "exec:" + exe + " -test.run=^$"
}

func runHelper(mode string) int {
	if code, ok := lifecycleHelper(mode); ok {
		return code
	}
	switch {
	case mode == "echo":
		err := Serve(os.Stdin, os.Stdout, zeroPolicy{}, ServeOptions{Name: "echo"})
		return exitCode(err)
	case mode == "hashbatch":
		err := Serve(os.Stdin, os.Stdout, hashPolicy{}, ServeOptions{Batch: 4})
		return exitCode(err)
	case mode == "echobatch":
		err := Serve(os.Stdin, os.Stdout, zeroPolicy{}, ServeOptions{Name: "echo", Batch: 64})
		return exitCode(err)
	case mode == "sum":
		err := Serve(os.Stdin, os.Stdout, &sumPolicy{}, ServeOptions{})
		return exitCode(err)
	case mode == "rawecho":
		// The floor: read a header line and its payload, answer a fixed
		// line, with no protocol work at all.
		in := bufio.NewReaderSize(os.Stdin, 1<<16)
		buf := make([]byte, 1<<20)
		reply := []byte(`{"msg":"action","t":0,"action":[0,0,0]}` + "\n")
		for {
			line, err := in.ReadSlice('\n')
			if err != nil {
				return 0
			}
			i := bytes.LastIndex(line, []byte(`"len":`))
			n, _ := strconv.Atoi(string(bytes.TrimRight(line[i+6:], "}\n")))
			io.ReadFull(in, buf[:n])
			os.Stdout.Write(reply)
		}
	case mode == "frame":
		err := Serve(os.Stdin, os.Stdout, &framePolicy{}, ServeOptions{})
		return exitCode(err)
	case strings.HasPrefix(mode, "net:"):
		// A built-in family, built from the hello like the test builds it.
		w := &netPolicy{}
		err := Serve(os.Stdin, os.Stdout, w, ServeOptions{Accept: func(h *Hello) error {
			grid, err := h.Tokens.Grid()
			if err != nil {
				return err
			}
			space, err := h.Action.Space()
			if err != nil {
				return err
			}
			w.Net, err = nets.New(nets.Config{Family: strings.TrimPrefix(mode, "net:")}, grid, space, netSeed)
			return err
		}})
		return exitCode(err)
	case mode == "refuse":
		err := Serve(os.Stdin, os.Stdout, zeroPolicy{}, ServeOptions{Accept: func(h *Hello) error {
			return fmt.Errorf("I only play drive, not %s", h.Game)
		}})
		if err != nil {
			return 0
		}
		return 1
	}
	return rawHelper(mode)
}

func exitCode(err error) int {
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 1
	}
	return 0
}

// rawHelper speaks the protocol by hand and misbehaves as mode says:
// "KIND" or "KIND:K" (at step K, default 2).
func rawHelper(mode string) int {
	kind, at := mode, 2
	if k, s, ok := strings.Cut(mode, ":"); ok {
		kind = k
		at, _ = strconv.Atoi(s)
	}
	in := bufio.NewReader(os.Stdin)
	out := os.Stdout
	line, err := in.ReadBytes('\n')
	if err != nil {
		return 1
	}
	var h Hello
	json.Unmarshal(line, &h)
	switch kind {
	case "silent":
		time.Sleep(time.Hour)
	case "badready":
		fmt.Fprintln(out, `{"msg":"ready","protocol":7}`)
		time.Sleep(time.Hour)
	case "argv":
		fmt.Fprintf(out, `{"msg":"ready","protocol":1,"name":%q}`+"\n", strings.Join(os.Args[1:], "|"))
	case "env":
		fmt.Fprintf(out, `{"msg":"ready","protocol":1,"name":%q}`+"\n", os.Getenv("TILEBENCH_GAME")+","+os.Getenv("TILEBENCH_OBS")+","+os.Getenv("TILEBENCH_PROTOCOL")+","+os.Getenv("X_EXTRA"))
	default:
		fmt.Fprintln(out, `{"msg":"ready","protocol":1,"name":"faulty"}`)
	}
	dim := h.Action.Dim
	for {
		line, err := in.ReadBytes('\n')
		if err != nil {
			return 0
		}
		var m struct {
			Msg string `json:"msg"`
			T   int    `json:"t"`
			Len int    `json:"len"`
		}
		if err := json.Unmarshal(line, &m); err != nil {
			fmt.Fprintln(os.Stderr, "helper: bad header", err)
			return 2
		}
		if m.Len > 0 {
			io.CopyN(io.Discard, in, int64(m.Len))
		}
		if m.Msg == "bye" {
			return 0
		}
		if m.Msg != "step" {
			continue
		}
		vals := make([]string, dim)
		for i := range vals {
			vals[i] = "0"
		}
		t := m.T
		if m.T == at {
			switch kind {
			case "crash":
				fmt.Fprintln(os.Stderr, "Traceback (most recent call last):")
				fmt.Fprintf(os.Stderr, "RuntimeError: boom at step %d\n", m.T)
				return 3
			case "exit0":
				os.Stdout.Close() // exits cleanly, output closed first
				return 0
			case "hang":
				time.Sleep(time.Hour)
			case "grandchild":
				// A grandchild in the same process group, holding stdout.
				c := exec.Command("sleep", "300")
				c.Stdout = out
				c.Start()
				fmt.Fprintf(os.Stderr, "grandchild %d\n", c.Process.Pid)
				time.Sleep(time.Hour)
			case "garbage":
				fmt.Fprintln(out, "hello there, I am not JSON")
				continue
			case "shape":
				vals = append(vals, "0")
			case "nan":
				vals[0] = "NaN"
			case "inf":
				vals[dim-1] = "-Infinity"
			case "bounds":
				vals[0] = "5"
			case "slow":
				time.Sleep(300 * time.Millisecond)
			case "oversize":
				out.Write([]byte(`{"msg":"action","t":` + strconv.Itoa(t) + `,"pad":"` + strings.Repeat("x", 200<<10) + `"}` + "\n"))
				continue
			case "payload":
				fmt.Fprintf(out, `{"msg":"action","t":%d,"action":[%s],"len":1000000}`+"\n", t, strings.Join(vals, ","))
				continue
			case "badt":
				t++
			case "error":
				fmt.Fprintln(out, `{"msg":"error","reason":"CUDA out of memory"}`)
				continue
			case "choice":
				vals[0] = "1.5"
			case "wrongmsg":
				fmt.Fprintf(out, `{"msg":"ready","t":%d}`+"\n", t)
				continue
			}
		}
		fmt.Fprintf(out, `{"msg":"action","t":%d,"action":[%s]}`+"\n", t, strings.Join(vals, ","))
	}
}

// netSeed is the parameter seed of the families served by the helper.
const netSeed = 11

// netPolicy is a net built once the hello has said what it plays.
type netPolicy struct{ nets.Net }

// zeroPolicy answers zeros: the trivial echo policy.
type zeroPolicy struct{}

func (zeroPolicy) Info() vision.Info                        { return vision.Info{Family: "zero", WantsFrame: true} }
func (zeroPolicy) Reset(uint64)                             {}
func (zeroPolicy) Act(*vision.Observation, []float64) error { return nil }

// sumPolicy is a deterministic function of the tokens, their positions,
// the frame, the previous action and the reset seed: the "built-in"
// policy the protocol must reproduce exactly.
type sumPolicy struct{ seed uint64 }

func (p *sumPolicy) Info() vision.Info {
	return vision.Info{Family: "sum", Invariant: true, WantsFrame: true}
}
func (p *sumPolicy) Reset(seed uint64) { p.seed = seed }
func (p *sumPolicy) Act(obs *vision.Observation, a []float64) error {
	var s, w float64
	ts := obs.Tokens
	for i := 0; i < ts.N; i++ {
		tk := ts.Token(i)
		s += float64(tk[0])
		w += float64(tk[len(tk)-1]) * float64(int(ts.Pos[i].Row)*3+int(ts.Pos[i].Col)+1)
	}
	var f float64
	if obs.Frame != nil {
		for i := 0; i < len(obs.Frame.Pix); i += 97 {
			f += float64(obs.Frame.Pix[i])
		}
	}
	a[0] = math.Tanh(s/float64(max(1, ts.N)) - 0.5 + 0.1*obs.PrevAction[1] + float64(p.seed%7)/10)
	if len(a) > 1 {
		a[1] = math.Tanh(w/1000 - f/1e5)
	}
	return nil
}

// framePolicy reads only the frame and the previous action.
type framePolicy struct{ seed uint64 }

func (p *framePolicy) Info() vision.Info { return vision.Info{Family: "frame", WantsFrame: true} }
func (p *framePolicy) Reset(seed uint64) { p.seed = seed }
func (p *framePolicy) Act(obs *vision.Observation, a []float64) error {
	var f, g float64
	for i := 0; i < len(obs.Frame.Pix); i += 4 {
		f += float64(obs.Frame.Pix[i]) * float64(i%13)
		g += float64(obs.Frame.Pix[i+1])
	}
	a[0] = math.Tanh(f/1e6 - 1 + 0.3*obs.PrevAction[0] + float64(p.seed%5)/10)
	a[1] = math.Tanh(g/1e5 - 0.1)
	return nil
}

// blobs is a small deterministic game: continuous (2 values in [-1,1])
// or discrete (3 choices); the return is the sum of the first action.
type blobs struct {
	discrete bool
	seed     uint64
	t        int
	x        float64
}

func (b *blobs) Spec() games.Spec {
	sp := games.Spec{Name: "blobs", Width: 32, Height: 24, StepLimit: 20}
	if b.discrete {
		sp.Action = games.Controls{Kind: games.Discrete, Names: []string{"a", "b", "c"}}
	} else {
		sp.Action = games.Controls{Kind: games.Continuous, Names: []string{"x", "y"}, Low: []float64{-1, -1}, High: []float64{1, 1}}
	}
	return sp
}
func (b *blobs) Reset(seed uint64) { b.seed, b.t, b.x = seed, 0, 0 }
func (b *blobs) Step(a []float64) (games.Step, error) {
	if err := b.Spec().Action.Check(a); err != nil {
		return games.Step{}, err
	}
	b.t++
	b.x += a[0]
	st := games.Step{Reward: a[0]}
	if b.t >= 20 {
		st.Done, st.Reason = true, games.TimeUp
	}
	return st, nil
}
func (b *blobs) Render(dst *image.RGBA) {
	r := patch.NewRand(patch.DeriveSeed(b.seed, uint64(b.t)))
	for y := 0; y < 24; y++ {
		for x := 0; x < 32; x++ {
			dst.SetRGBA(x, y, color.RGBA{uint8(r.IntN(256)), uint8(x*7 + int(10*b.x)), uint8(y * 9), 255})
		}
	}
}

func testGrid(t testing.TB) *patch.Grid {
	t.Helper()
	g, err := patch.NewGrid(patch.GridConfig{Width: 32, Height: 24, PatchW: 8})
	if err != nil {
		t.Fatal(err)
	}
	return g
}
