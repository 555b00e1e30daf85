package remote

import (
	"encoding/json"
	"image"
	"io"
	"net"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/vision"
)

// serveTCP serves one session of pol with opt on a local port.
func serveTCP(t *testing.T, pol vision.Policy, opt ServeOptions) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { ln.Close() })
	go func() {
		c, err := ln.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		Serve(c, c, pol, opt)
	}()
	return "tcp://" + ln.Addr().String()
}

// observations renders n frames of the test game and cuts them with a
// scrambling pipeline, each in its own buffers.
func observations(t *testing.T, n int, obsKind string) []*vision.Observation {
	t.Helper()
	g := &blobs{}
	grid := testGrid(t)
	tok := patch.NewTokenizer(grid)
	pipe, err := patch.NewPipeline(grid, patch.Spec{Scramble: "full", Every: 3, NoiseTokens: 2})
	if err != nil {
		t.Fatal(err)
	}
	pipe.Reset(9)
	g.Reset(4)
	var out []*vision.Observation
	raw := image.NewRGBA(image.Rect(0, 0, 32, 24))
	clean := patch.NewTokenSet(grid.N(), grid.D())
	for i := 0; i < n; i++ {
		g.Render(raw)
		g.Step([]float64{0.3, 0})
		ts := patch.NewTokenSet(pipe.Capacity(), grid.D())
		if err := tok.Tokenize(raw, clean); err != nil {
			t.Fatal(err)
		}
		if err := pipe.Apply(i, clean, ts, nil); err != nil {
			t.Fatal(err)
		}
		o := &vision.Observation{Tokens: ts, Grid: grid, Step: i, PrevAction: []float64{float64(i) / 10, -0.5}}
		if obsKind == ObsFrame {
			o.Frame = image.NewRGBA(image.Rect(0, 0, grid.OutW, grid.OutH))
			if err := tok.Assemble(ts, o.Frame); err != nil {
				t.Fatal(err)
			}
		}
		out = append(out, o)
	}
	return out
}

// TestBatchSameAsSteps: a batched session gives exactly the actions of
// steps sent one by one, for frames and for tokens, uint8 and float32.
func TestBatchSameAsSteps(t *testing.T) {
	for _, kind := range []string{ObsFrame, ObsTokens} {
		for _, dtype := range []string{Uint8, Float32} {
			obs := observations(t, 11, kind)
			cfg := Config{Game: (&blobs{}).Spec(), Grid: testGrid(t), Obs: kind, Dtype: dtype}
			one, err := Open(serveTCP(t, &sumPolicy{}, ServeOptions{}), cfg)
			if err != nil {
				t.Fatal(err)
			}
			if one.BatchSize() != 0 {
				t.Fatalf("a policy that offered no batch: BatchSize %d", one.BatchSize())
			}
			bat, err := Open(serveTCP(t, &sumPolicy{}, ServeOptions{Batch: 4}), cfg)
			if err != nil {
				t.Fatal(err)
			}
			if bat.BatchSize() != 4 {
				t.Fatalf("BatchSize %d, want 4", bat.BatchSize())
			}
			one.Reset(5)
			bat.Reset(5)
			want := make([][]float64, len(obs))
			for i, o := range obs {
				want[i] = make([]float64, 2)
				if err := one.Act(o, want[i]); err != nil {
					t.Fatal(err)
				}
			}
			got := make([][]float64, len(obs))
			for i := range got {
				got[i] = make([]float64, 2)
			}
			for i := 0; i < len(obs); i += 4 {
				j := min(i+4, len(obs))
				if err := bat.ActBatch(obs[i:j], got[i:j]); err != nil {
					t.Fatal(err)
				}
			}
			for i := range want {
				if want[i][0] != got[i][0] || want[i][1] != got[i][1] {
					t.Errorf("%s/%s frame %d: batched %v, one by one %v", kind, dtype, i, got[i], want[i])
				}
			}
			if err := bat.ActBatch(obs[:5], got[:5]); err == nil {
				t.Error("a batch over the offered size: no error")
			}
			one.Close()
			bat.Close()
		}
	}
}

// fakeBatch answers every batch with the reply given.
func fakeBatch(t *testing.T, ready, reply string) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { ln.Close() })
	go func() {
		c, err := ln.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		buf := make([]byte, 1<<16)
		line := func() map[string]any {
			var b []byte
			one := buf[:1]
			for {
				if _, err := io.ReadFull(c, one); err != nil {
					return nil
				}
				if one[0] == '\n' {
					break
				}
				b = append(b, one[0])
			}
			var m map[string]any
			json.Unmarshal(b, &m)
			if n, ok := m["len"].(float64); ok {
				io.CopyN(io.Discard, c, int64(n))
			}
			return m
		}
		line()
		c.Write([]byte(ready + "\n"))
		for {
			m := line()
			if m == nil || m["msg"] == "bye" {
				return
			}
			if m["msg"] == "batch" {
				c.Write([]byte(reply + "\n"))
			}
		}
	}()
	return "tcp://" + ln.Addr().String()
}

// TestBatchFaults: a reply of the wrong count, width or step is a fault
// naming the batch; a bad "batch" in ready is a handshake fault.
func TestBatchFaults(t *testing.T) {
	cfg := Config{Game: (&blobs{}).Spec(), Grid: testGrid(t)}
	obs := observations(t, 2, ObsFrame)
	acts := [][]float64{make([]float64, 2), make([]float64, 2)}
	for _, c := range []struct{ reply, want string }{
		{`{"msg":"actions","t":0,"count":2,"action":[0,0,0]}`, "action has 3 values, want 4"},
		{`{"msg":"actions","t":0,"count":1,"action":[0,0]}`, `"count":2`},
		{`{"msg":"actions","t":1,"count":2,"action":[0,0,0,0]}`, `"t":0`},
		{`{"msg":"action","t":0,"action":[0,0]}`, "want actions"},
		{`{"msg":"actions","t":0,"count":2,"action":[0,0,0,7]}`, "outside [-1, 1]"},
	} {
		p, err := Open(fakeBatch(t, `{"msg":"ready","protocol":1,"batch":2}`, c.reply), cfg)
		if err != nil {
			t.Fatal(err)
		}
		err = p.ActBatch(obs, acts)
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("reply %s: %v, want one line saying %q", c.reply, err, c.want)
		}
		p.Close()
	}
	if _, err := Open(fakeBatch(t, `{"msg":"ready","protocol":1,"batch":-3}`, ""), cfg); err == nil || !strings.Contains(err.Error(), "batch") {
		t.Errorf("ready with batch -3: %v", err)
	}
}

// FuzzBatchReply feeds arbitrary actions replies to the batch checker:
// it must never panic, and must accept only well-formed replies.
func FuzzBatchReply(f *testing.F) {
	f.Add([]byte(`{"msg":"actions","t":0,"count":2,"action":[0.5,0,-1,1]}`))
	f.Add([]byte(`{"msg":"actions","t":0,"count":2,"action":[0.5,0,-1]}`))
	f.Add([]byte(`{"msg":"actions","t":0,"count":2,"action":[NaN,0,0,0]}`))
	f.Add([]byte(`{"msg":"actions","t":"0","count":2}`))
	f.Add([]byte(`{"msg":"error","reason":"out of memory"}`))
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 32, Height: 24, PatchW: 8})
	spec := games.Spec{Name: "g", Width: 32, Height: 24, Action: games.Controls{Kind: games.Continuous,
		Names: []string{"x", "y"}, Low: []float64{-1, -1}, High: []float64{1, 1}}}
	f.Fuzz(func(t *testing.T, line []byte) {
		p := &Policy{target: "fuzz", cfg: Config{Game: spec, Grid: grid}, dim: 2, batch: 2}
		obs := []*vision.Observation{{Step: 0}, {Step: 1}}
		acts := [][]float64{make([]float64, 2), make([]float64, 2)}
		if f := p.parseReply("batch", 0, line); f != nil {
			return
		}
		if err := p.checkBatch(obs, acts); err == nil {
			for _, a := range acts {
				for _, v := range a {
					if !(v >= -1 && v <= 1) {
						t.Fatalf("accepted %q with action %v", line, a)
					}
				}
			}
		}
	})
}

// FuzzServeBatch feeds arbitrary batch messages to Serve.
func FuzzServeBatch(f *testing.F) {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 16, Height: 8, PatchW: 8})
	for _, obs := range []string{ObsFrame, ObsTokens} {
		h := Hello{Msg: "hello", Protocol: Version, Game: "g", Obs: obs, Dtype: Uint8, Frame: [3]int{8, 16, 3},
			Tokens: layoutOf(grid, 4), Action: specOf(games.Controls{Kind: games.Discrete, Names: []string{"a", "b"}}),
			Limits: Limits{MaxLine: MaxLine, MaxPayload: 1024}}
		b, _ := json.Marshal(h)
		hello := append(b, '\n')
		f.Add(hello, []byte(`{"msg":"batch","count":2,"t":[0,1],"n":[2,1],"prev":[0,1],"len":588}`+"\n"+strings.Repeat("x", 588)+`{"msg":"bye"}`+"\n"))
		f.Add(hello, []byte(`{"msg":"batch","count":2,"t":[0,1],"prev":[1,0],"len":768}`+"\n"+strings.Repeat("y", 768)))
		f.Add(hello, []byte(`{"msg":"batch","count":3,"t":[0,1],"len":0}`+"\n"))
	}
	f.Fuzz(func(t *testing.T, hello, rest []byte) {
		var h Hello
		if json.Unmarshal(hello, &h) != nil || h.Limits.MaxPayload > 1<<16 || h.Tokens.Max > 1024 || h.Frame[0]*h.Frame[1] > 1<<16 || h.Frame[0] < 0 || h.Frame[1] < 0 || h.Frame[2] < 0 || h.Frame[2] > 4 {
			return
		}
		in := append(append([]byte(nil), hello...), rest...)
		Serve(strings.NewReader(string(in)), io.Discard, zeroPolicy{}, ServeOptions{Batch: 4})
	})
}

// TestRefExampleBatches: both Python examples answer batch messages with
// exactly the actions they give one step at a time, on frames of the
// paddle game (its own frame size, whatever it is).
func TestRefExampleBatches(t *testing.T) {
	reftest.Need(t, "numpy")
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 4})
	if err != nil {
		t.Fatal(err)
	}
	var obs []*vision.Observation
	g.Reset(games.HeldOut(0))
	r := patch.NewRand(3)
	for i := 0; i < 40; i++ {
		f := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
		g.Render(f)
		obs = append(obs, &vision.Observation{Frame: f, Grid: grid, Step: i, PrevAction: make([]float64, sp.Action.Dim())})
		a := []float64{float64(r.IntN(max(1, sp.Action.Choices())))}
		if sp.Action.Kind != games.Discrete {
			a = make([]float64, sp.Action.Dim())
		}
		if st, err := g.Step(a); err != nil || st.Done {
			break
		}
	}
	for _, script := range []string{"policy_stdlib.py", "policy_numpy.py"} {
		mk := examplePolicy(t, script, ObsFrame, Uint8)
		one, bat := mk(sp, grid).(*Policy), mk(sp, grid).(*Policy)
		if bat.BatchSize() < 2 {
			t.Fatalf("%s offers no batches", script)
		}
		one.Reset(1)
		bat.Reset(1)
		dim := sp.Action.Dim()
		for i := 0; i < len(obs); i += bat.BatchSize() {
			j := min(i+bat.BatchSize(), len(obs))
			got := make([][]float64, j-i)
			for k := range got {
				got[k] = make([]float64, dim)
			}
			if err := bat.ActBatch(obs[i:j], got); err != nil {
				t.Fatalf("%s: %v", script, err)
			}
			for k, o := range obs[i:j] {
				want := make([]float64, dim)
				if err := one.Act(o, want); err != nil {
					t.Fatalf("%s: %v", script, err)
				}
				for d := range want {
					if want[d] != got[k][d] {
						t.Errorf("%s step %d: batched %v, one at a time %v", script, o.Step, got[k], want)
					}
				}
			}
		}
		one.Close()
		bat.Close()
	}
}
